// Package gateway is the HTTP side of the daemon: the REST/JSON API (grpc-gateway, calling the
// gRPC server over a client connection so that every gRPC interceptor runs for REST callers
// too), the OpenAPI document, health and readiness probes and the Prometheus metrics.
package gateway

import (
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"strings"

	"github.com/grpc-ecosystem/grpc-gateway/v2/runtime"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/encoding/protojson"

	"strayleaf/api/openapi"
	pb "strayleaf/proto/strayleaf/v1"
)

// Options configure the HTTP handler.
type Options struct {
	// MaxBodyBytes bounds a request body (413 beyond it); the streaming endpoint is bounded per
	// message by the gRPC server instead.
	MaxBodyBytes int64
	// Ready reports whether the daemon takes requests (for /readyz).
	Ready func() bool
	// Metrics serves /metrics; nil leaves it out.
	Metrics http.Handler
}

// StreamPath is the REST path of PlaceStream: newline-delimited JSON in both directions.
const StreamPath = "/v1/placements:stream"

// JSON is the marshaler of the REST API: proto field names (snake_case), every field present
// in answers, unknown fields in requests refused.
func JSON() *runtime.JSONPb {
	return &runtime.JSONPb{
		MarshalOptions:   protojson.MarshalOptions{UseProtoNames: true, EmitUnpopulated: true},
		UnmarshalOptions: protojson.UnmarshalOptions{DiscardUnknown: false},
	}
}

// New returns the HTTP handler of the daemon, calling the gRPC services through conn.
func New(ctx context.Context, conn *grpc.ClientConn, opt Options) (http.Handler, error) {
	mux := runtime.NewServeMux(
		runtime.WithMarshalerOption(runtime.MIMEWildcard, bodyJSON{JSON()}),
		runtime.WithErrorHandler(errorHandler),
	)
	if err := pb.RegisterPlacementServiceHandler(ctx, mux, conn); err != nil {
		return nil, fmt.Errorf("gateway: %w", err)
	}
	if err := pb.RegisterModelServiceHandler(ctx, mux, conn); err != nil {
		return nil, fmt.Errorf("gateway: %w", err)
	}
	h := http.NewServeMux()
	h.Handle("/v1/", limitBody(opt.MaxBodyBytes, mux))
	h.HandleFunc("GET /openapi.json", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		w.Write(openapi.Document)
	})
	h.HandleFunc("GET /healthz", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "text/plain; charset=utf-8")
		fmt.Fprintln(w, "ok")
	})
	h.HandleFunc("GET /readyz", func(w http.ResponseWriter, _ *http.Request) {
		w.Header().Set("Content-Type", "text/plain; charset=utf-8")
		if opt.Ready != nil && !opt.Ready() {
			w.WriteHeader(http.StatusServiceUnavailable)
			fmt.Fprintln(w, "not ready")
			return
		}
		fmt.Fprintln(w, "ready")
	})
	if opt.Metrics != nil {
		h.Handle("GET /metrics", opt.Metrics)
	}
	return h, nil
}

// limitBody refuses bodies over max bytes with 413 and the API's error shape, and lets the
// streaming endpoint read and write at once (HTTP/1.1 full duplex).
func limitBody(max int64, next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if r.URL.Path == StreamPath {
			// Answers flow while witnesses are still being read.
			_ = http.NewResponseController(w).EnableFullDuplex()
			next.ServeHTTP(w, r)
			return
		}
		if max > 0 {
			if r.ContentLength > max {
				writeError(w, http.StatusRequestEntityTooLarge, status.Newf(codes.ResourceExhausted,
					"request body of %d bytes; at most %d allowed", r.ContentLength, max))
				return
			}
			r.Body = http.MaxBytesReader(w, r.Body, max)
		}
		next.ServeHTTP(w, r)
	})
}

func writeError(w http.ResponseWriter, code int, st *status.Status) {
	b, err := JSON().Marshal(st.Proto())
	if err != nil {
		b = []byte(`{"code":13,"message":"error encoding an error"}`)
	}
	w.Header().Set("Content-Type", "application/json")
	w.WriteHeader(code)
	w.Write(b)
}

// errorHandler is the gateway's default error answer ({"code","message","details"} with the
// HTTP status of the gRPC code), with a proper Bearer challenge on 401 (RFC 6750 section 3; the
// default handler puts the status message there) and a body too large for the limit answered
// 413.
func errorHandler(ctx context.Context, mux *runtime.ServeMux, m runtime.Marshaler, w http.ResponseWriter, r *http.Request, err error) {
	st, _ := status.FromError(err)
	switch {
	case st.Code() == codes.Unauthenticated:
		w = challengeWriter{w}
	case strings.Contains(st.Message(), "http: request body too large"):
		writeError(w, http.StatusRequestEntityTooLarge, status.New(codes.ResourceExhausted, "request body too large"))
		return
	}
	runtime.DefaultHTTPErrorHandler(ctx, mux, m, w, r, err)
}

// challengeWriter sets the WWW-Authenticate challenge just before the header is written.
type challengeWriter struct{ http.ResponseWriter }

func (w challengeWriter) WriteHeader(code int) {
	w.Header().Set("WWW-Authenticate", `Bearer realm="strayleaf"`)
	w.ResponseWriter.WriteHeader(code)
}

// bodyJSON is the gateway's JSON marshaler with request-body errors that say what was expected:
// the JSON decoder alone answers a bad body with a bare "unexpected EOF" or "invalid value".
type bodyJSON struct{ *runtime.JSONPb }

func (j bodyJSON) NewDecoder(r io.Reader) runtime.Decoder {
	d := j.JSONPb.NewDecoder(r)
	return runtime.DecoderFunc(func(v interface{}) error {
		err := d.Decode(v)
		if err != nil && !errors.Is(err, io.EOF) {
			return fmt.Errorf("request body is not the expected JSON object (see /openapi.json for the fields; names are snake_case): %w", err)
		}
		return err
	})
}
