package main

import (
	"bytes"
	"context"
	"strings"
	"testing"
)

// Bad command-line use exits with status 2 (common practice for command-line tools) and names
// the command and what was wrong; --help exits 0.
func TestUsageErrorsExit2(t *testing.T) {
	for _, tc := range []struct {
		args []string
		want string // in the last line of stderr
	}{
		{[]string{"place", "--bogus"}, "strayleaf place: flag provided but not defined: -bogus"},
		{[]string{"train", "--groups", "x"}, "strayleaf train: invalid value \"x\" for flag -groups"},
		{[]string{"models", "publish", "--bogus"}, "strayleaf models publish: flag provided but not defined"},
		{[]string{"models", "publish", "--store", "x.db"}, "strayleaf models publish: expected BUNDLE"},
		{[]string{"token", "new", "--name"}, "strayleaf token new: flag needs an argument: -name"},
		{[]string{"place"}, "strayleaf place: --witnesses is required (see --help)"},
		{[]string{"place", "--witnesses", "no-such.csv", "--format", "xml"}, "strayleaf place: --format \"xml\": expected table, json, csv or tei"},
		{[]string{"groups"}, "strayleaf groups: no model given: use --bundle FILE, or --store DB --model REF"},
		{[]string{"nosuch"}, "unknown command \"nosuch\""},
	} {
		var out, errb bytes.Buffer
		code := run(context.Background(), tc.args, &out, &errb)
		lines := strings.Split(strings.TrimSpace(errb.String()), "\n")
		if code != 2 {
			t.Errorf("%q: exit %d; want 2 (stderr %q)", tc.args, code, errb.String())
		}
		if !strings.Contains(errb.String(), tc.want) || (tc.args[0] != "nosuch" && !strings.Contains(lines[len(lines)-1], tc.want)) {
			t.Errorf("%q: stderr %q; want its last line to contain %q", tc.args, errb.String(), tc.want)
		}
	}
	var out, errb bytes.Buffer
	if code := run(context.Background(), []string{"place", "--help"}, &out, &errb); code != 0 {
		t.Errorf("place --help: exit %d; want 0", code)
	}
}
