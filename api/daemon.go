// Package api runs the strayleaf service: the gRPC server (PlacementService, ModelService,
// health), the REST gateway with the OpenAPI document, probes and metrics, over one model store.
// cmd/strayleafd is its command line; Start also serves tests and in-process demos.
//
// Requests pass, in order, through metrics, logging (and panic recovery), authentication and
// authorisation (package auth) and the request deadline before they reach package server. REST
// requests come through the gateway's client connection to a second gRPC server on a loopback
// port with the same interceptors (labelled via="rest"), so both doors keep the same rules.
package api

import (
	"context"
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"net/http"
	"sync"
	"sync/atomic"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"
	"google.golang.org/grpc/health"
	healthpb "google.golang.org/grpc/health/grpc_health_v1"

	"strayleaf/api/auth"
	"strayleaf/api/gateway"
	"strayleaf/api/metrics"
	"strayleaf/api/server"
	"strayleaf/api/wire"
	"strayleaf/modelstore"
	pb "strayleaf/proto/strayleaf/v1"
)

// Config is everything the daemon needs to start.
type Config struct {
	// StorePath is the bbolt model store file (created if missing).
	StorePath string
	// GRPCAddr and HTTPAddr are the listen addresses ("127.0.0.1:0" picks a free port). An
	// empty HTTPAddr serves no REST, probes or metrics.
	GRPCAddr, HTTPAddr string
	// TokensFile holds the bearer tokens (see package auth). Required unless InsecureNoAuth.
	TokensFile string
	// InsecureNoAuth lets every caller in as admin: for local demos only.
	InsecureNoAuth bool
	// TLSCertFile and TLSKeyFile, both or neither, put TLS on both listeners.
	TLSCertFile, TLSKeyFile string
	// Demo trains and publishes the embedded demo model when the store has no models.
	Demo bool
	// Limits bound requests (server.DefaultLimits() if zero).
	Limits server.Limits
	// RequestTimeout bounds a unary call (default 30s).
	RequestTimeout time.Duration
	// CacheBytes bounds the store's decoded-model cache (modelstore default if 0).
	CacheBytes int64
	// Logger receives the structured log (slog.Default() if nil).
	Logger *slog.Logger
}

// Daemon is a running service.
type Daemon struct {
	cfg      Config
	log      *slog.Logger
	store    *modelstore.Store
	checker  *auth.Checker
	metrics  *metrics.Metrics
	health   *health.Server
	grpcPub  *grpc.Server // public listener
	grpcGate *grpc.Server // loopback listener the gateway calls
	gateConn *grpc.ClientConn
	http     *http.Server
	grpcLis  net.Listener
	httpLis  net.Listener
	ready    atomic.Bool
	errs     chan error
	stopOnce sync.Once
	stopErr  error
	done     chan struct{}
}

// Start opens the store, seeds the demo if asked, and starts serving. It returns once the
// listeners are bound.
func Start(ctx context.Context, cfg Config) (_ *Daemon, err error) {
	log := cfg.Logger
	if log == nil {
		log = slog.Default()
	}
	if cfg.Limits == (server.Limits{}) {
		cfg.Limits = server.DefaultLimits()
	}
	if err := cfg.Limits.Validate(); err != nil {
		return nil, err
	}
	if cfg.RequestTimeout <= 0 {
		cfg.RequestTimeout = 30 * time.Second
	}
	if cfg.GRPCAddr == "" {
		return nil, errors.New("no gRPC listen address: give --grpc-addr HOST:PORT")
	}
	if cfg.StorePath == "" {
		return nil, errors.New("no model store: give --store FILE")
	}
	if (cfg.TLSCertFile == "") != (cfg.TLSKeyFile == "") {
		return nil, errors.New("TLS needs both --tls-cert and --tls-key")
	}
	if cfg.TokensFile == "" && !cfg.InsecureNoAuth {
		return nil, errors.New("no tokens file: give --tokens FILE (make tokens with `strayleaf token new`), or --insecure-no-auth for a local demo")
	}
	// d is not the named result: an error return (nil, err) must not clear it under the
	// clean-up below and the server goroutines, which read it.
	d := &Daemon{cfg: cfg, log: log, metrics: metrics.New(), errs: make(chan error, 4), done: make(chan struct{})}
	cleanup := func() {
		for _, g := range []*grpc.Server{d.grpcPub, d.grpcGate} {
			if g != nil {
				g.Stop()
			}
		}
		if d.gateConn != nil {
			d.gateConn.Close()
		}
		for _, l := range []net.Listener{d.grpcLis, d.httpLis} {
			if l != nil {
				l.Close()
			}
		}
		if d.store != nil {
			d.store.Close()
		}
	}
	defer func() {
		if err != nil {
			cleanup()
		}
	}()

	policy := server.Policy()
	if cfg.InsecureNoAuth {
		d.checker = auth.NewDisabledChecker(policy)
		log.Warn("AUTHENTICATION IS OFF (--insecure-no-auth): anyone who can reach the listeners may publish, move aliases, delete and export models. Use this for a local demo only, never on a shared network.")
	} else {
		entries, err := auth.ReadTokensFile(cfg.TokensFile)
		if err != nil {
			return nil, err
		}
		d.checker = auth.NewChecker(policy, entries)
		if len(entries) == 0 {
			log.Warn("the tokens file has no tokens: every call but health will be refused", "tokens", cfg.TokensFile)
		}
	}

	var tlsCfg *tls.Config
	if cfg.TLSCertFile != "" {
		cert, err := tls.LoadX509KeyPair(cfg.TLSCertFile, cfg.TLSKeyFile)
		if err != nil {
			return nil, fmt.Errorf("loading the TLS certificate: %w", err)
		}
		tlsCfg = &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	}

	st, err := modelstore.Open(cfg.StorePath, modelstore.Options{CacheBytes: cfg.CacheBytes})
	if err != nil {
		return nil, err
	}
	d.store = st
	d.metrics.WatchCache(st.CacheStats)
	if cfg.Demo {
		t0 := time.Now()
		r, seeded, err := seedDemo(st)
		if err != nil {
			return nil, err
		}
		if seeded {
			log.Info("demo model trained and published", "model", r.String(), "alias", modelstore.DefaultAlias, "took", time.Since(t0).Round(time.Millisecond))
		}
	}

	srv, err := server.New(st, server.Options{Limits: cfg.Limits, Metrics: d.metrics, Logger: log})
	if err != nil {
		return nil, err
	}
	d.health = health.NewServer()
	newGRPC := func(via string, creds credentials.TransportCredentials) *grpc.Server {
		opts := []grpc.ServerOption{
			grpc.ForceServerCodecV2(wire.Codec()),
			grpc.MaxRecvMsgSize(cfg.Limits.MaxMessageBytes),
			grpc.MaxSendMsgSize(cfg.Limits.MaxMessageBytes + 1<<20),
			grpc.ChainUnaryInterceptor(d.metrics.UnaryInterceptor(via), logUnary(log, via), d.checker.UnaryInterceptor(), requestTimeout(cfg.RequestTimeout)),
			grpc.ChainStreamInterceptor(d.metrics.StreamInterceptor(via), logStream(log, via), d.checker.StreamInterceptor()),
		}
		if creds != nil {
			opts = append(opts, grpc.Creds(creds))
		}
		g := grpc.NewServer(opts...)
		srv.Register(g)
		healthpb.RegisterHealthServer(g, d.health)
		return g
	}
	var creds credentials.TransportCredentials
	if tlsCfg != nil {
		creds = credentials.NewTLS(tlsCfg)
	}
	d.grpcPub = newGRPC("grpc", creds)
	if d.grpcLis, err = net.Listen("tcp", cfg.GRPCAddr); err != nil {
		return nil, fmt.Errorf("gRPC listener: %w", err)
	}
	go d.serve("grpc", func() error { return d.grpcPub.Serve(d.grpcLis) })

	if cfg.HTTPAddr != "" {
		d.grpcGate = newGRPC("rest", nil)
		gateLis, err := net.Listen("tcp", "127.0.0.1:0")
		if err != nil {
			return nil, fmt.Errorf("gateway loopback listener: %w", err)
		}
		go d.serve("gateway loopback", func() error { return d.grpcGate.Serve(gateLis) })
		d.gateConn, err = grpc.NewClient(gateLis.Addr().String(),
			grpc.WithTransportCredentials(insecure.NewCredentials()),
			grpc.WithDefaultCallOptions(grpc.ForceCodecV2(wire.Codec()),
				grpc.MaxCallRecvMsgSize(cfg.Limits.MaxMessageBytes+1<<20), grpc.MaxCallSendMsgSize(cfg.Limits.MaxMessageBytes)))
		if err != nil {
			return nil, fmt.Errorf("gateway connection: %w", err)
		}
		h, err := gateway.New(context.WithoutCancel(ctx), d.gateConn, gateway.Options{
			MaxBodyBytes: int64(cfg.Limits.MaxMessageBytes), Ready: d.ready.Load, Metrics: d.metrics.Handler()})
		if err != nil {
			return nil, err
		}
		d.http = &http.Server{Handler: h, ReadHeaderTimeout: 10 * time.Second, TLSConfig: tlsCfg,
			ErrorLog: slog.NewLogLogger(log.Handler(), slog.LevelWarn)}
		if d.httpLis, err = net.Listen("tcp", cfg.HTTPAddr); err != nil {
			return nil, fmt.Errorf("HTTP listener: %w", err)
		}
		go d.serve("http", func() error {
			var err error
			if tlsCfg != nil {
				err = d.http.ServeTLS(d.httpLis, "", "")
			} else {
				err = d.http.Serve(d.httpLis)
			}
			if errors.Is(err, http.ErrServerClosed) {
				return nil
			}
			return err
		})
	}

	for _, svc := range []string{"", pb.PlacementService_ServiceDesc.ServiceName, pb.ModelService_ServiceDesc.ServiceName} {
		d.health.SetServingStatus(svc, healthpb.HealthCheckResponse_SERVING)
	}
	d.ready.Store(true)
	attrs := []any{"store", cfg.StorePath, "grpc", d.GRPCAddr(), "tls", tlsCfg != nil, "auth", !cfg.InsecureNoAuth, "tokens", d.checker.Tokens()}
	if d.httpLis != nil {
		attrs = append(attrs, "http", d.HTTPAddr())
	}
	log.Info("strayleafd serving", attrs...)
	if tlsCfg == nil && !cfg.InsecureNoAuth {
		log.Info("no TLS: bearer tokens cross the network in the clear; give --tls-cert and --tls-key unless every caller is on this machine")
	}
	return d, nil
}

// serve runs one server loop and reports an unexpected end.
func (d *Daemon) serve(name string, run func() error) {
	if err := run(); err != nil {
		d.log.Error("listener failed", "listener", name, "error", err)
		d.errs <- fmt.Errorf("%s: %w", name, err)
	}
}

// Failed delivers an error when a listener stops unexpectedly.
func (d *Daemon) Failed() <-chan error { return d.errs }

// GRPCAddr returns the bound gRPC address.
func (d *Daemon) GRPCAddr() string { return d.grpcLis.Addr().String() }

// HTTPAddr returns the bound HTTP address, or "" without REST.
func (d *Daemon) HTTPAddr() string {
	if d.httpLis == nil {
		return ""
	}
	return d.httpLis.Addr().String()
}

// Store returns the open model store.
func (d *Daemon) Store() *modelstore.Store { return d.store }

// ReloadTokens rereads the tokens file (on SIGHUP). On an error the old tokens stay in force.
func (d *Daemon) ReloadTokens() error {
	if d.cfg.InsecureNoAuth {
		d.log.Warn("tokens not reloaded: authentication is off (--insecure-no-auth)")
		return nil
	}
	entries, err := auth.ReadTokensFile(d.cfg.TokensFile)
	if err != nil {
		d.log.Error("tokens not reloaded; the previous tokens stay in force", "error", err)
		return err
	}
	d.checker.Replace(entries)
	d.log.Info("tokens reloaded", "tokens", len(entries), "file", d.cfg.TokensFile)
	return nil
}

// Shutdown stops taking requests, lets the ones in flight finish (until ctx ends, when the
// rest are cut off), and closes the store. It is safe to call more than once.
func (d *Daemon) Shutdown(ctx context.Context) error {
	d.stopOnce.Do(func() {
		d.stopErr = d.shutdown(ctx)
		close(d.done)
	})
	<-d.done
	return d.stopErr
}

func (d *Daemon) shutdown(ctx context.Context) error {
	t0 := time.Now()
	d.log.Info("shutting down: refusing new requests, finishing those in flight")
	d.ready.Store(false)
	d.health.Shutdown()
	var wg sync.WaitGroup
	var httpErr error
	if d.http != nil {
		wg.Add(1)
		go func() {
			defer wg.Done()
			if httpErr = d.http.Shutdown(ctx); httpErr != nil {
				d.http.Close()
			}
		}()
	}
	wg.Add(1)
	go func() { defer wg.Done(); gracefulStop(ctx, d.grpcPub) }()
	wg.Wait()
	if d.grpcGate != nil {
		gracefulStop(ctx, d.grpcGate)
		d.gateConn.Close()
	}
	err := d.store.Close()
	if err != nil {
		err = fmt.Errorf("closing the model store: %w", err)
	} else if httpErr != nil {
		err = fmt.Errorf("HTTP requests cut off at shutdown: %w", httpErr)
	} else if ctx.Err() != nil {
		err = fmt.Errorf("requests cut off at shutdown: %w", ctx.Err())
	}
	d.log.Info("stopped", "took", time.Since(t0).Round(time.Millisecond), "error", err)
	return err
}

// gracefulStop waits for g's calls to finish, or stops it hard when ctx ends.
func gracefulStop(ctx context.Context, g *grpc.Server) {
	done := make(chan struct{})
	go func() { g.GracefulStop(); close(done) }()
	select {
	case <-done:
	case <-ctx.Done():
		g.Stop()
		<-done
	}
}
