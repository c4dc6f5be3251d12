package main

import (
	"bytes"
	"context"
	"strings"
	"testing"

	"strayleaf/api/auth"
)

// `strayleaf token new` prints a token and the tokens-file line whose hash is the token's.
func TestTokenNew(t *testing.T) {
	var out, errOut bytes.Buffer
	if code := run(context.Background(), []string{"token", "new", "--name", "scanner-2", "--role", "publish"}, &out, &errOut); code != 0 {
		t.Fatalf("exit %d: %s", code, errOut.String())
	}
	lines := strings.Split(strings.TrimSpace(out.String()), "\n")
	if len(lines) != 2 || !strings.HasPrefix(lines[0], auth.TokenPrefix) {
		t.Fatalf("output %q: want a token line and a tokens-file line", out.String())
	}
	es, err := auth.ParseTokens(strings.NewReader(lines[1]), "output")
	if err != nil {
		t.Fatal(err)
	}
	if len(es) != 1 || es[0].Name != "scanner-2" || es[0].Role != auth.RolePublish || es[0].Hash != auth.HashToken(lines[0]) {
		t.Fatalf("tokens-file line %q parses to %+v", lines[1], es)
	}
	for _, args := range [][]string{
		{"token"}, {"token", "old"}, {"token", "new", "--role", "place"}, {"token", "new", "--name", "x", "--role", "reader"},
		{"token", "new", "--name", "x y", "--role", "place"},
	} {
		out.Reset()
		if code := run(context.Background(), args, &out, &errOut); code == 0 || out.Len() != 0 {
			t.Errorf("%q: exit %d, output %q; want a failure and no token", args, code, out.String())
		}
	}
}
