package api_test

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"strayleaf"
	"strayleaf/api"
	"strayleaf/api/auth"
	"strayleaf/client"
	"strayleaf/placement/collation"
	"strayleaf/placement/model"
)

// The demo model is trained once per test binary (a few hundred milliseconds).
var (
	demoOnce   sync.Once
	demoBundle []byte
	demoErr    error
)

func demoModelBundle(t testing.TB) []byte {
	t.Helper()
	demoOnce.Do(func() { demoBundle, demoErr = api.TrainDemo() })
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demoBundle
}

func decodeBundle(t testing.TB, b []byte) *model.Model {
	t.Helper()
	m, err := model.Decode(b)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// witnessesOf returns the witnesses of a long-CSV collation with their readings in unit order.
func witnessesOf(t testing.TB, csv []byte, name string) []client.Witness {
	t.Helper()
	c, err := collation.ReadCSV(bytes.NewReader(csv), name)
	if err != nil {
		t.Fatal(err)
	}
	var out []client.Witness
	for w := range c.NumWitnesses() {
		cw := client.Witness{Siglum: c.Witness(w)}
		for u := range c.NumUnits() {
			if r := c.Reading(w, u); r != collation.Lacuna {
				cw.Readings = append(cw.Readings, client.Reading{Unit: c.Unit(u).ID, Reading: c.Unit(u).Readings[r]})
			}
		}
		out = append(out, cw)
	}
	return out
}

func demoFragments(t testing.TB) []client.Witness {
	return witnessesOf(t, strayleaf.DemoFragments, "demo fragments")
}

func demoCopies(t testing.TB) []client.Witness {
	return witnessesOf(t, strayleaf.DemoCollation, "demo collation")
}

func modelReadings(rs []client.Reading) []model.Reading {
	out := make([]model.Reading, len(rs))
	for i, r := range rs {
		out[i] = model.Reading{Unit: r.Unit, Reading: r.Reading}
	}
	return out
}

// localPlacement is what the API must answer for w against m: the model's own placement in the
// client's shape, with nothing optional asked for.
func localPlacement(t testing.TB, m *model.Model, ref string, w client.Witness) *client.Placement {
	return localPlacementWith(t, m, ref, w, client.PlaceOptions{})
}

// localSuggestions is what the API must answer to Suggest: the model's own, in the client's
// shape.
func localSuggestions(t testing.TB, m *model.Model, ref string, w client.Witness, opt client.SuggestOptions) *client.Suggestions {
	t.Helper()
	sg, err := m.Suggest(w.Siglum, modelReadings(w.Readings), model.SuggestOptions{Top: opt.Top, Candidates: opt.Candidates})
	if err != nil {
		t.Fatalf("local suggestions for %s: %v", w.Siglum, err)
	}
	out := &client.Suggestions{Witness: sg.Witness, Model: ref, Probe: sg.Probe, EntropyBits: sg.Entropy, Posterior: []client.GroupShare{}, Units: []client.Suggestion{}}
	for _, g := range sg.Posterior {
		out.Posterior = append(out.Posterior, client.GroupShare{Group: g.Group, Share: g.Share})
	}
	for _, u := range sg.Units {
		s := client.Suggestion{Unit: u.Unit, Gain: u.Gain, Hints: map[string]string{}, Readings: []client.ReadingHint{}}
		for _, h := range u.Hints {
			s.Hints[h.Reading] = h.Favours
			s.Readings = append(s.Readings, client.ReadingHint{Reading: h.Reading, Probability: h.Probability, Favours: h.Favours})
		}
		out.Units = append(out.Units, s)
	}
	return out
}

func nonNil(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

// tokens are one token per role, written to a tokens file.
type tokens struct {
	place, publish, admin string
	file                  string
}

func writeTokens(t testing.TB, dir string) tokens {
	t.Helper()
	var tk tokens
	var lines []string
	for _, x := range []struct {
		name string
		role auth.Role
		dst  *string
	}{{"catalogue", auth.RolePlace, &tk.place}, {"editor", auth.RolePublish, &tk.publish}, {"keeper", auth.RoleAdmin, &tk.admin}} {
		tok, err := auth.NewToken()
		if err != nil {
			t.Fatal(err)
		}
		line, err := auth.Line(x.name, x.role, tok)
		if err != nil {
			t.Fatal(err)
		}
		*x.dst = tok
		lines = append(lines, line)
	}
	tk.file = filepath.Join(dir, "tokens.txt")
	content := "# strayleafd tokens for the tests\n" + strings.Join(lines, "\n") + "\n"
	if err := os.WriteFile(tk.file, []byte(content), 0o600); err != nil {
		t.Fatal(err)
	}
	return tk
}

// testDaemon is a daemon started in-process on loopback with a store under t.TempDir().
type testDaemon struct {
	*api.Daemon
	tokens tokens
	log    *syncBuffer
}

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func startDaemon(t testing.TB, edit func(*api.Config)) *testDaemon {
	t.Helper()
	dir := t.TempDir()
	td := &testDaemon{tokens: writeTokens(t, dir), log: &syncBuffer{}}
	cfg := api.Config{
		StorePath: filepath.Join(dir, "models.db"), GRPCAddr: "127.0.0.1:0", HTTPAddr: "127.0.0.1:0",
		TokensFile: td.tokens.file, Logger: slog.New(slog.NewTextHandler(td.log, &slog.HandlerOptions{Level: slog.LevelInfo})),
	}
	if edit != nil {
		edit(&cfg)
	}
	d, err := api.Start(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	td.Daemon = d
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		if err := d.Shutdown(ctx); err != nil {
			t.Errorf("shutdown: %v", err)
		}
	})
	return td
}

func (td *testDaemon) client(t testing.TB, token string) *client.Client {
	t.Helper()
	var opts []client.Option
	if token != "" {
		opts = append(opts, client.WithToken(token))
	}
	c, err := client.Dial(td.GRPCAddr(), opts...)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close() })
	return c
}

// publishDemo publishes the demo bundle as name (first version gets "current").
func (td *testDaemon) publishDemo(t testing.TB, name string) client.Ref {
	t.Helper()
	r, err := td.client(t, td.tokens.publish).PublishModel(context.Background(), name, demoModelBundle(t), "test", "")
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// restResponse is a decoded REST answer.
type restResponse struct {
	status int
	header http.Header
	body   []byte
}

func (r restResponse) decode(t testing.TB, v any) {
	t.Helper()
	if err := json.Unmarshal(r.body, v); err != nil {
		t.Fatalf("decoding %s: %v", r.body, err)
	}
}

// restError is the gateway's error body.
type restError struct {
	Code    int    `json:"code"`
	Message string `json:"message"`
	Details []struct {
		Type            string `json:"@type"`
		FieldViolations []struct {
			Field       string `json:"field"`
			Description string `json:"description"`
		} `json:"field_violations"`
	} `json:"details"`
}

func (td *testDaemon) rest(t testing.TB, method, path, token string, body any, header ...string) restResponse {
	t.Helper()
	var rd io.Reader
	switch b := body.(type) {
	case nil:
	case string:
		rd = strings.NewReader(b)
	case []byte:
		rd = bytes.NewReader(b)
	default:
		raw, err := json.Marshal(b)
		if err != nil {
			t.Fatal(err)
		}
		rd = bytes.NewReader(raw)
	}
	req, err := http.NewRequest(method, "http://"+td.HTTPAddr()+path, rd)
	if err != nil {
		t.Fatal(err)
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	for i := 0; i+1 < len(header); i += 2 {
		req.Header.Set(header[i], header[i+1])
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	raw, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return restResponse{status: resp.StatusCode, header: resp.Header, body: raw}
}

// placeBody is the REST placement request for w.
func placeBody(w client.Witness) map[string]any {
	return map[string]any{"witness": w.Siglum, "readings": w.Readings}
}
