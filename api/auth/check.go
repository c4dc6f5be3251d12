package auth

import (
	"context"
	"crypto/subtle"
	"strings"
	"sync/atomic"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
)

// Policy maps full gRPC method names ("/strayleaf.v1.ModelService/SetAlias") to the role each
// needs. A method that needs RoleNone is public. A method missing from the policy is refused to
// everyone: new methods are closed until they are given a role.
type Policy map[string]Role

// Identity is the caller a request was authenticated as.
type Identity struct {
	Name string
	Role Role
}

type identityKey struct{}

// FromContext returns the caller's identity, if the request carried a valid token (or auth is
// off, when it is the anonymous admin).
func FromContext(ctx context.Context) (Identity, bool) {
	id, ok := ctx.Value(identityKey{}).(Identity)
	return id, ok
}

// WithIdentity returns ctx carrying id.
func WithIdentity(ctx context.Context, id Identity) context.Context {
	return context.WithValue(ctx, identityKey{}, id)
}

// Checker authenticates bearer tokens and authorises methods by role. Its token set can be
// replaced at any time (on SIGHUP) without disturbing requests in flight.
type Checker struct {
	policy   Policy
	entries  atomic.Pointer[[]Entry]
	disabled bool
}

// NewChecker returns a checker over the given tokens.
func NewChecker(policy Policy, entries []Entry) *Checker {
	c := &Checker{policy: policy}
	c.Replace(entries)
	return c
}

// NewDisabledChecker returns a checker that lets every call through as the anonymous admin
// ("insecure-no-auth"). Methods missing from the policy are still refused.
func NewDisabledChecker(policy Policy) *Checker {
	c := &Checker{policy: policy, disabled: true}
	c.Replace(nil)
	return c
}

// AnonymousName is the identity of callers when auth is disabled.
const AnonymousName = "anonymous"

// Replace swaps in a new token set.
func (c *Checker) Replace(entries []Entry) {
	cp := append([]Entry(nil), entries...)
	c.entries.Store(&cp)
}

// Tokens returns the number of tokens known.
func (c *Checker) Tokens() int { return len(*c.entries.Load()) }

// lookup finds the entry whose hash matches token's. Every entry is compared, in constant time,
// whatever matches, so the time taken does not tell how much of a hash matched or which entry.
func (c *Checker) lookup(token string) (Entry, bool) {
	h := HashToken(token)
	var found Entry
	match := 0
	for _, e := range *c.entries.Load() {
		eq := subtle.ConstantTimeCompare(h[:], e.Hash[:])
		if eq == 1 {
			found = e
		}
		match |= eq
	}
	return found, match == 1
}

// Check authenticates the call in ctx for method and returns ctx carrying the identity.
func (c *Checker) Check(ctx context.Context, method string) (context.Context, error) {
	need, known := c.policy[method]
	if !known {
		return nil, status.Errorf(codes.PermissionDenied, "method %s is not open to any role", method)
	}
	if c.disabled {
		return WithIdentity(ctx, Identity{Name: AnonymousName, Role: RoleAdmin}), nil
	}
	token, present := bearer(ctx)
	if need == RoleNone && !present {
		return ctx, nil
	}
	if !present {
		return nil, status.Error(codes.Unauthenticated, "no bearer token: send the header \"authorization: Bearer TOKEN\"")
	}
	e, ok := c.lookup(token)
	if token == "" || !ok {
		return nil, status.Error(codes.Unauthenticated, "the bearer token is not recognised (revoked, mistyped, or not in the server's tokens file)")
	}
	if !e.Role.Allows(need) {
		return nil, status.Errorf(codes.PermissionDenied, "token %q has role %s; %s needs role %s", e.Name, e.Role, shortMethod(method), need)
	}
	return WithIdentity(ctx, Identity{Name: e.Name, Role: e.Role}), nil
}

// bearer extracts the token from the "authorization" metadata. present is true when the
// header is there at all, even if malformed (then the token is "" and never matches).
func bearer(ctx context.Context) (token string, present bool) {
	md, ok := metadata.FromIncomingContext(ctx)
	if !ok {
		return "", false
	}
	vals := md.Get("authorization")
	if len(vals) == 0 {
		return "", false
	}
	scheme, tok, ok := strings.Cut(strings.TrimSpace(vals[0]), " ")
	if !ok || !strings.EqualFold(scheme, "bearer") {
		return "", true
	}
	return strings.TrimSpace(tok), true
}

func shortMethod(full string) string {
	if i := strings.LastIndexByte(full, '/'); i >= 0 {
		return full[i+1:]
	}
	return full
}

// UnaryInterceptor checks every unary call.
func (c *Checker) UnaryInterceptor() grpc.UnaryServerInterceptor {
	return func(ctx context.Context, req any, info *grpc.UnaryServerInfo, handler grpc.UnaryHandler) (any, error) {
		ctx, err := c.Check(ctx, info.FullMethod)
		if err != nil {
			return nil, err
		}
		return handler(ctx, req)
	}
}

// StreamInterceptor checks every streaming call.
func (c *Checker) StreamInterceptor() grpc.StreamServerInterceptor {
	return func(srv any, ss grpc.ServerStream, info *grpc.StreamServerInfo, handler grpc.StreamHandler) error {
		ctx, err := c.Check(ss.Context(), info.FullMethod)
		if err != nil {
			return err
		}
		return handler(srv, &identityStream{ServerStream: ss, ctx: ctx})
	}
}

type identityStream struct {
	grpc.ServerStream
	ctx context.Context
}

func (s *identityStream) Context() context.Context { return s.ctx }
