package api_test

import (
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"math/big"
	"net"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"google.golang.org/grpc/codes"

	"strayleaf/api"
	"strayleaf/api/auth"
	"strayleaf/client"
)

// Missing or wrong tokens are Unauthenticated (401), a role too low is PermissionDenied (403),
// over gRPC and REST alike; a reloaded tokens file takes effect at once.
func TestAuthRolesOverGRPCAndREST(t *testing.T) {
	td := startDaemon(t, nil)
	td.publishDemo(t, "demo")
	ctx := context.Background()
	frag := demoFragments(t)[0]
	bundle := demoModelBundle(t)
	tk := td.tokens

	type call struct {
		name       string
		need       auth.Role
		grpc       func(c *client.Client) error
		method     string
		path       string
		body       any
		restStatus int // on success
	}
	calls := []call{
		{"list", auth.RolePlace, func(c *client.Client) error { _, err := c.ListModels(ctx); return err }, "GET", "/v1/models", nil, 200},
		{"describe", auth.RolePlace, func(c *client.Client) error { _, err := c.GetModel(ctx, "demo"); return err }, "GET", "/v1/models/demo", nil, 200},
		{"place", auth.RolePlace, func(c *client.Client) error { _, err := c.Place(ctx, "demo", frag.Siglum, frag.Readings); return err },
			"POST", "/v1/models/demo/placements", placeBody(frag), 200},
		{"suggest", auth.RolePlace, func(c *client.Client) error {
			_, _, err := c.Suggest(ctx, "demo", frag.Siglum, frag.Readings, 0)
			return err
		},
			"POST", "/v1/models/demo/suggestions", placeBody(frag), 200},
		{"publish", auth.RolePublish, func(c *client.Client) error { _, err := c.PublishModel(ctx, "other", bundle, "", ""); return err },
			"POST", "/v1/models/other/versions", map[string]any{"bundle": bundle}, 200},
		{"alias", auth.RolePublish, func(c *client.Client) error { _, err := c.SetAlias(ctx, "demo", "stable", 1); return err },
			"PUT", "/v1/models/demo/aliases/stable", map[string]any{"version": 1}, 200},
		{"history", auth.RolePlace, func(c *client.Client) error { _, err := c.History(ctx, ""); return err }, "GET", "/v1/history", nil, 200},
		// Removing an alias that does not exist: NotFound once past authorisation.
		{"unalias", auth.RolePublish, func(c *client.Client) error { return c.RemoveAlias(ctx, "demo", "nosuch") },
			"DELETE", "/v1/models/demo/aliases/nosuch", nil, 404},
		{"export", auth.RoleAdmin, func(c *client.Client) error { _, _, err := c.ExportModel(ctx, "demo@1"); return err },
			"GET", "/v1/models/demo@1/bundle", nil, 200},
		// Deleting a version that does not exist: an allowed caller gets NotFound, which shows
		// that it got past authorisation without changing anything.
		{"delete", auth.RoleAdmin, func(c *client.Client) error { return c.DeleteModelVersion(ctx, "demo", 99) },
			"DELETE", "/v1/models/demo/versions/99", nil, 404},
	}
	holders := []struct {
		name  string
		token string
		role  auth.Role
	}{{"no token", "", auth.RoleNone}, {"wrong token", "slt_not-a-token-of-ours", auth.RoleNone},
		{"place", tk.place, auth.RolePlace}, {"publish", tk.publish, auth.RolePublish}, {"admin", tk.admin, auth.RoleAdmin}}
	for _, h := range holders {
		c := td.client(t, h.token)
		for _, cl := range calls {
			wantCode, wantHTTP := codes.OK, cl.restStatus
			switch {
			case h.role == auth.RoleNone:
				wantCode, wantHTTP = codes.Unauthenticated, 401
			case h.role < cl.need:
				wantCode, wantHTTP = codes.PermissionDenied, 403
			case cl.name == "delete" || cl.name == "unalias":
				wantCode = codes.NotFound
			}
			if err := cl.grpc(c); client.Code(err) != wantCode {
				t.Errorf("%s, gRPC %s: %v; want %v", h.name, cl.name, err, wantCode)
			}
			resp := td.rest(t, cl.method, cl.path, h.token, cl.body)
			if resp.status != wantHTTP {
				t.Errorf("%s, REST %s %s: %d %.200s; want %d", h.name, cl.method, cl.path, resp.status, resp.body, wantHTTP)
			}
			if wantHTTP == 401 && !strings.HasPrefix(resp.header.Get("WWW-Authenticate"), "Bearer") {
				t.Errorf("%s, REST %s: 401 without a Bearer challenge", h.name, cl.name)
			}
		}
	}
	// A malformed header is as good as none.
	if resp := td.rest(t, "GET", "/v1/models", "", nil, "Authorization", "Basic "+tk.admin); resp.status != 401 {
		t.Errorf("Basic scheme: %d", resp.status)
	}

	// Reload: a new token works once the file lists it; a removed one stops working.
	fresh, _ := auth.NewToken()
	line, _ := auth.Line("night-shift", auth.RolePlace, fresh)
	if _, err := td.client(t, fresh).ListModels(ctx); client.Code(err) != codes.Unauthenticated {
		t.Fatalf("unknown token before reload: %v", err)
	}
	adminLine, _ := auth.Line("keeper", auth.RoleAdmin, tk.admin)
	if err := os.WriteFile(tk.file, []byte(adminLine+"\n"+line+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := td.ReloadTokens(); err != nil {
		t.Fatal(err)
	}
	if _, err := td.client(t, fresh).ListModels(ctx); err != nil {
		t.Errorf("new token after reload: %v", err)
	}
	if _, err := td.client(t, tk.place).ListModels(ctx); client.Code(err) != codes.Unauthenticated {
		t.Errorf("removed token after reload: %v", err)
	}
	// A broken file is refused and the tokens in force stay.
	os.WriteFile(tk.file, []byte("broken line\n"), 0o600)
	if err := td.ReloadTokens(); err == nil {
		t.Error("a broken tokens file was accepted")
	}
	if _, err := td.client(t, fresh).ListModels(ctx); err != nil {
		t.Errorf("tokens lost after a failed reload: %v", err)
	}
}

// --insecure-no-auth lets calls in without a token and says so in the log.
func TestInsecureNoAuth(t *testing.T) {
	td := startDaemon(t, func(c *api.Config) { c.TokensFile, c.InsecureNoAuth = "", true })
	ctx := context.Background()
	c := td.client(t, "")
	if _, err := c.PublishModel(ctx, "demo", demoModelBundle(t), "", ""); err != nil {
		t.Fatal(err)
	}
	if _, _, err := c.ExportModel(ctx, "demo"); err != nil {
		t.Fatal(err)
	}
	if resp := td.rest(t, "GET", "/v1/models", "", nil); resp.status != 200 {
		t.Fatalf("REST without a token: %d", resp.status)
	}
	if log := td.log.String(); !strings.Contains(log, "level=WARN") || !strings.Contains(log, "AUTHENTICATION IS OFF") {
		t.Errorf("no loud warning in the log:\n%s", log)
	}
	info, err := td.Store().Info("demo")
	if err != nil || info.By != auth.AnonymousName {
		t.Errorf("publisher recorded as %q (%v); want %q", info.By, err, auth.AnonymousName)
	}
}

// The daemon refuses to start without tokens unless auth is explicitly off.
func TestStartNeedsTokensOrInsecure(t *testing.T) {
	_, err := api.Start(context.Background(), api.Config{StorePath: filepath.Join(t.TempDir(), "m.db"), GRPCAddr: "127.0.0.1:0"})
	if err == nil || !strings.Contains(err.Error(), "--tokens") {
		t.Fatalf("Start without tokens: %v", err)
	}
}

// A start step that fails after the daemon is made (a missing tokens file, a store that cannot
// be opened, a busy port) returns the error, without a panic, and lets go of what it opened:
// the store can be opened again and the listener's port is free.
func TestStartFailuresReturnErrors(t *testing.T) {
	dir := t.TempDir()
	store := filepath.Join(dir, "m.db")
	if _, err := api.Start(context.Background(), api.Config{StorePath: store, GRPCAddr: "127.0.0.1:0",
		TokensFile: filepath.Join(dir, "no-such-tokens.txt")}); err == nil || !strings.Contains(err.Error(), "no-such-tokens.txt") {
		t.Errorf("missing tokens file: %v", err)
	}
	if _, err := api.Start(context.Background(), api.Config{StorePath: filepath.Join(dir, "no-such-dir", "m.db"), GRPCAddr: "127.0.0.1:0",
		InsecureNoAuth: true}); err == nil {
		t.Error("a store in a missing folder was accepted")
	}
	busy, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer busy.Close()
	if _, err := api.Start(context.Background(), api.Config{StorePath: store, GRPCAddr: "127.0.0.1:0", HTTPAddr: busy.Addr().String(),
		InsecureNoAuth: true}); err == nil || !strings.Contains(err.Error(), "HTTP listener") {
		t.Errorf("busy HTTP port: %v", err)
	}
	// The failed start closed the store (bbolt holds a file lock while open).
	td, err := api.Start(context.Background(), api.Config{StorePath: store, GRPCAddr: "127.0.0.1:0", InsecureNoAuth: true})
	if err != nil {
		t.Fatalf("starting on the store after the failed starts: %v", err)
	}
	if err := td.Shutdown(context.Background()); err != nil {
		t.Error(err)
	}
}

// selfSigned writes a certificate for 127.0.0.1 and its key, PEM, into dir.
func selfSigned(t *testing.T, dir string) (certFile, keyFile string) {
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1), Subject: pkix.Name{CommonName: "strayleafd test"},
		NotBefore: time.Now().Add(-time.Hour), NotAfter: time.Now().Add(time.Hour),
		IPAddresses: []net.IP{net.ParseIP("127.0.0.1")}, KeyUsage: x509.KeyUsageDigitalSignature | x509.KeyUsageCertSign,
		ExtKeyUsage: []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth}, IsCA: true, BasicConstraintsValid: true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	kb, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600)
	os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: kb}), 0o600)
	return certFile, keyFile
}

// With --tls-cert/--tls-key both listeners speak TLS; a client trusting the certificate gets
// through, a plaintext one does not.
func TestTLS(t *testing.T) {
	dir := t.TempDir()
	cert, key := selfSigned(t, dir)
	td := startDaemon(t, func(c *api.Config) { c.TLSCertFile, c.TLSKeyFile = cert, key })
	ctx := context.Background()
	c, err := client.Dial(td.GRPCAddr(), client.WithToken(td.tokens.publish), client.WithCAFile(cert))
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	if _, err := c.PublishModel(ctx, "demo", demoModelBundle(t), "", ""); err != nil {
		t.Fatalf("over TLS: %v", err)
	}
	plain := td.client(t, td.tokens.place)
	tctx, cancel := context.WithTimeout(ctx, 2*time.Second)
	defer cancel()
	if _, err := plain.ListModels(tctx); client.Code(err) != codes.Unavailable {
		t.Errorf("plaintext client against TLS: %v; want Unavailable", err)
	}
	pool := x509.NewCertPool()
	pemBytes, _ := os.ReadFile(cert)
	pool.AppendCertsFromPEM(pemBytes)
	hc := &http.Client{Transport: &http.Transport{TLSClientConfig: &tls.Config{RootCAs: pool}}}
	req, _ := http.NewRequest("GET", "https://"+td.HTTPAddr()+"/v1/models", nil)
	req.Header.Set("Authorization", "Bearer "+td.tokens.place)
	resp, err := hc.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Errorf("REST over TLS: %d", resp.StatusCode)
	}
	if _, err := api.Start(ctx, api.Config{StorePath: filepath.Join(dir, "x.db"), GRPCAddr: "127.0.0.1:0", InsecureNoAuth: true, TLSCertFile: cert}); err == nil {
		t.Error("a certificate without a key was accepted")
	}
}
