// Package client is the Go client of strayleafd: typed calls for placing witnesses and managing
// models, with bearer-token and TLS options and errors that say what went wrong and what to do.
//
//	c, err := client.Dial("127.0.0.1:7450", client.WithToken(tok))
//	p, err := c.Place(ctx, "demo", "Ov-f3", []client.Reading{{Unit: "oil.14", Reading: "whone"}})
//	fmt.Println(p.Model, p.BestGroup, p.Confidence)
//
// Model references name a model in the server's store: "name" (the version aliased "current"),
// "name@3" or "name@alias". Every answer names the exact version used ("name@3").
package client

import (
	"context"
	"crypto/tls"
	"crypto/x509"
	"errors"
	"fmt"
	"os"
	"strconv"
	"strings"

	"google.golang.org/grpc"
	"google.golang.org/grpc/credentials"
	"google.golang.org/grpc/credentials/insecure"

	"strayleaf/api/wire"
	pb "strayleaf/proto/strayleaf/v1"
)

// DefaultMaxMessageBytes bounds a message the client sends or receives (a bundle included).
const DefaultMaxMessageBytes = 64 << 20

type config struct {
	token    string
	tls      *tls.Config
	caFile   string
	maxBytes int
	dialOpts []grpc.DialOption
}

// Option configures Dial.
type Option func(*config)

// WithToken sends token as "authorization: Bearer TOKEN" on every call.
func WithToken(token string) Option { return func(c *config) { c.token = token } }

// WithTLS connects over TLS with cfg (nil: the system's roots).
func WithTLS(cfg *tls.Config) Option {
	return func(c *config) {
		if cfg == nil {
			cfg = &tls.Config{}
		}
		c.tls = cfg
	}
}

// WithCAFile connects over TLS, trusting the PEM certificates in path (for a server with a
// private certificate authority or a self-signed certificate).
func WithCAFile(path string) Option { return func(c *config) { c.caFile = path } }

// WithMaxMessageBytes bounds messages sent and received (default DefaultMaxMessageBytes).
func WithMaxMessageBytes(n int) Option { return func(c *config) { c.maxBytes = n } }

// WithDialOptions adds gRPC dial options. Leave the codec alone: the client sends placement
// requests as wire.Input values, which only the codec of package wire encodes.
func WithDialOptions(opts ...grpc.DialOption) Option {
	return func(c *config) { c.dialOpts = append(c.dialOpts, opts...) }
}

// Client is a connection to one strayleafd. It is safe for concurrent use.
type Client struct {
	addr   string
	conn   *grpc.ClientConn
	places pb.PlacementServiceClient
	models pb.ModelServiceClient
	token  bool
	tls    bool
}

// bearer is the per-call credential. It does not insist on TLS, so that a server on the same
// machine can be called without it; over a network, use TLS.
type bearer string

func (b bearer) GetRequestMetadata(context.Context, ...string) (map[string]string, error) {
	return map[string]string{"authorization": "Bearer " + string(b)}, nil
}
func (bearer) RequireTransportSecurity() bool { return false }

// Dial prepares a client for the strayleafd gRPC address addr ("host:port"). It does not wait
// for the server: the first call connects, and says so if it cannot.
func Dial(addr string, opts ...Option) (*Client, error) {
	cfg := config{maxBytes: DefaultMaxMessageBytes}
	for _, o := range opts {
		o(&cfg)
	}
	if addr == "" {
		return nil, errors.New("no server address; expected host:port of strayleafd's gRPC listener")
	}
	if strings.Contains(addr, "://") {
		return nil, fmt.Errorf("server address %q: give host:port without a scheme (TLS is chosen with a CA file or TLS option)", addr)
	}
	if cfg.caFile != "" {
		pem, err := os.ReadFile(cfg.caFile)
		if err != nil {
			return nil, fmt.Errorf("reading the TLS CA file: %w", err)
		}
		pool := x509.NewCertPool()
		if !pool.AppendCertsFromPEM(pem) {
			return nil, fmt.Errorf("TLS CA file %s holds no PEM certificate", cfg.caFile)
		}
		if cfg.tls == nil {
			cfg.tls = &tls.Config{}
		}
		cfg.tls = cfg.tls.Clone()
		cfg.tls.RootCAs = pool
	}
	creds := insecure.NewCredentials()
	if cfg.tls != nil {
		creds = credentials.NewTLS(cfg.tls)
	}
	dopts := []grpc.DialOption{grpc.WithTransportCredentials(creds),
		grpc.WithDefaultCallOptions(grpc.ForceCodecV2(wire.Codec()), grpc.MaxCallRecvMsgSize(cfg.maxBytes), grpc.MaxCallSendMsgSize(cfg.maxBytes))}
	if cfg.token != "" {
		dopts = append(dopts, grpc.WithPerRPCCredentials(bearer(cfg.token)))
	}
	dopts = append(dopts, cfg.dialOpts...)
	conn, err := grpc.NewClient(addr, dopts...)
	if err != nil {
		return nil, fmt.Errorf("connecting to strayleafd at %s: %w", addr, err)
	}
	return &Client{addr: addr, conn: conn, places: pb.NewPlacementServiceClient(conn), models: pb.NewModelServiceClient(conn),
		token: cfg.token != "", tls: cfg.tls != nil}, nil
}

// Close closes the connection.
func (c *Client) Close() error { return c.conn.Close() }

// Conn returns the gRPC connection, for calls the typed methods do not cover (health).
func (c *Client) Conn() *grpc.ClientConn { return c.conn }

// Addr returns the server address.
func (c *Client) Addr() string { return c.addr }

// Ref is an exact model version, as the server answers it.
type Ref struct {
	Name    string
	Version int
}

// String gives "name@version".
func (r Ref) String() string { return r.Name + "@" + strconv.Itoa(r.Version) }

// ParseRef reads an exact version reference "name@3".
func ParseRef(s string) (Ref, error) {
	name, v, ok := strings.Cut(s, "@")
	n, err := strconv.Atoi(v)
	if !ok || name == "" || err != nil || n < 1 {
		return Ref{}, fmt.Errorf("model version %q: expected name@N with N a version number", s)
	}
	return Ref{Name: name, Version: n}, nil
}

// VersionRef returns the reference "name@version".
func VersionRef(name string, version int) string { return Ref{name, version}.String() }

// AliasRef returns the reference "name@alias".
func AliasRef(name, alias string) string { return name + "@" + alias }
