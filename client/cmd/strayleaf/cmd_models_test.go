package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"strayleaf/modelstore"
	"strayleaf/placement/model"
	pb "strayleaf/proto/strayleaf/v1"
)

// testBundle writes an invented model bundle (units of three readings, k groups) to dir/file.
func testBundle(t *testing.T, dir, file string, units, k int, seed int) (string, []byte) {
	t.Helper()
	m := &pb.Model{CollationSha256: fmt.Sprintf("invented-%d", seed), GroupCount: int32(k), Fit: &pb.FitSummary{Objective: float64(seed)}}
	for u := 0; u < units; u++ {
		m.Units = append(m.Units, &pb.ModelUnit{Id: fmt.Sprintf("u%d", u+1), Readings: []string{"a", "b", "c"}, RowStart: int32(3 * u), RowEnd: int32(3*u + 3)})
		for r := 0; r < 3; r++ {
			m.Rows = append(m.Rows, &pb.ProfileRow{Unit: int32(u), Reading: int32(r), Support: 2, Weight: 1})
			for g := 0; g < k; g++ {
				m.Profile = append(m.Profile, float64((u*7+r*3+g*5+seed)%11)/10)
			}
		}
	}
	for g := 0; g < k; g++ {
		m.Groups = append(m.Groups, &pb.GroupSummary{Id: fmt.Sprintf("G%d", g+1)})
	}
	b, err := model.EncodeBundle(m)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, file)
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return path, b
}

// cli runs the strayleaf command line and returns its exit status, stdout and stderr.
func cli(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

func mustCLI(t *testing.T, args ...string) string {
	t.Helper()
	code, out, errs := cli(t, args...)
	if code != 0 {
		t.Fatalf("strayleaf %s: exit %d\n%s%s", strings.Join(args, " "), code, out, errs)
	}
	return out
}

func TestModelsCommands(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "models.db")
	b1path, _ := testBundle(t, dir, "one.bundle", 8, 3, 1)
	b2path, b2 := testBundle(t, dir, "two.bundle", 9, 2, 2)

	out := mustCLI(t, "models", "publish", "--store", db, "--name", "north", "--by", "ana", "--note", "first", b1path)
	if !strings.Contains(out, "published north@1") || !strings.Contains(out, "aliases: current") {
		t.Errorf("publish said %q", out)
	}
	// Flags may follow the bundle.
	out = mustCLI(t, "models", "publish", b2path, "--store", db, "--name", "north", "--alias", "candidate", "--by", "ben", "--json")
	var pub publishedJSON
	if err := json.Unmarshal([]byte(out), &pub); err != nil || pub.Ref != "north@2" || pub.Version.By != "ben" || pub.Aliases["candidate"] != 2 {
		t.Errorf("publish --json = %s (%v)", out, err)
	}

	out = mustCLI(t, "models", "list", "--store", db, "--json")
	var list []modelstore.ModelInfo
	if err := json.Unmarshal([]byte(out), &list); err != nil {
		t.Fatal(err)
	}
	if len(list) != 1 || len(list[0].Versions) != 2 || list[0].Aliases["current"] != 1 || list[0].Aliases["candidate"] != 2 {
		t.Errorf("list --json = %s", out)
	}
	out = mustCLI(t, "models", "list", "--store", db)
	if !strings.Contains(out, "north@1") || !strings.Contains(out, "current") || !strings.Contains(out, "north@2") {
		t.Errorf("list = %q", out)
	}

	out = mustCLI(t, "models", "show", "north@candidate", "--store", db, "--json")
	var show showJSON
	if err := json.Unmarshal([]byte(out), &show); err != nil || show.Ref != "north@2" || show.Version.Summary.Groups != 2 || show.Version.Summary.Units != 9 {
		t.Errorf("show --json = %s (%v)", out, err)
	}
	out = mustCLI(t, "models", "show", "--store", db, "north")
	for _, says := range []string{"north@1", "asked for", "sha256", "groups", "first", "ana"} {
		if !strings.Contains(out, says) {
			t.Errorf("show does not say %q:\n%s", says, out)
		}
	}

	out = mustCLI(t, "models", "alias", "--store", db, "--by", "cy", "north", "current", "2")
	if !strings.Contains(out, "north@current: 1 -> 2") {
		t.Errorf("alias said %q", out)
	}
	code, _, errs := cli(t, "models", "delete", "--store", db, "north", "2")
	if code == 0 || !strings.Contains(errs, "aliases candidate, current point at it") {
		t.Errorf("deleting an aliased version: exit %d, %q", code, errs)
	}
	mustCLI(t, "models", "delete", "--store", db, "north", "1")

	exported := filepath.Join(dir, "north@2.bundle")
	mustCLI(t, "models", "export", "--store", db, "--out", exported, "north@current")
	if got, err := os.ReadFile(exported); err != nil || !bytes.Equal(got, b2) {
		t.Errorf("export wrote other bytes (%v)", err)
	}
	other := filepath.Join(dir, "other.db")
	out = mustCLI(t, "models", "import", "--store", other, exported)
	if !strings.Contains(out, "imported north@1") {
		t.Errorf("import without --name said %q; expected the name from the file name", out)
	}
	out = mustCLI(t, "models", "import", "--store", other, "--name", "south", exported)
	if !strings.Contains(out, "imported south@1") {
		t.Errorf("import --name said %q", out)
	}
	tampered := filepath.Join(dir, "tampered.bundle")
	bad := append([]byte(nil), b2...)
	bad[len(bad)/2] ^= 1
	os.WriteFile(tampered, bad, 0o644)
	if code, _, errs := cli(t, "models", "import", "--store", other, "--name", "bad", tampered); code == 0 || !strings.Contains(errs, "checksum") {
		t.Errorf("importing a tampered bundle: exit %d, %q", code, errs)
	}

	backup := filepath.Join(dir, "backup.db")
	mustCLI(t, "models", "backup", "--store", db, "--out", backup)
	restored := filepath.Join(dir, "restored.db")
	mustCLI(t, "models", "restore", "--from", backup, "--store", restored)
	out = mustCLI(t, "models", "verify", "--store", restored)
	if !strings.Contains(out, "1 models, 1 versions") {
		t.Errorf("verify of the restored store said %q", out)
	}

	out = mustCLI(t, "models", "history", "--store", db, "--json")
	var events []modelstore.Event
	if err := json.Unmarshal([]byte(out), &events); err != nil {
		t.Fatal(err)
	}
	var kinds []string
	for _, e := range events {
		kinds = append(kinds, fmt.Sprintf("%s %s@%d %s", e.Kind, e.Name, e.Version, e.By))
	}
	want := []string{"publish north@1 ana", "alias north@1 ana", "publish north@2 ben", "alias north@2 ben", "alias north@2 cy", "delete north@1 " + defaultActor()}
	if strings.Join(kinds, "; ") != strings.Join(want, "; ") {
		t.Errorf("history\n got %v\nwant %v", kinds, want)
	}
	out = mustCLI(t, "models", "history", "--store", db)
	if !strings.Contains(out, "SEQ") || !strings.Contains(out, "delete") {
		t.Errorf("history = %q", out)
	}
}

func TestModelsUsage(t *testing.T) {
	code, out, _ := cli(t, "models", "publish", "--help")
	_ = out
	if code != 0 {
		t.Errorf("models publish --help: exit %d", code)
	}
	if _, _, errs := cli(t, "models", "publish", "--help"); !strings.Contains(errs, "Usage: strayleaf models publish --store DB --name NAME") {
		t.Errorf("publish --help printed %q", errs)
	}
	for _, args := range [][]string{
		{"models"},
		{"models", "frobnicate"},
		{"models", "publish", "--store", "x.db", "b.bundle"}, // no --name
		{"models", "list"}, // no --store
		{"models", "alias", "--store", "x.db", "m", "current"},      // too few
		{"models", "alias", "--store", "x.db", "m", "current", "x"}, // not a number
		{"models", "show", "--store", filepath.Join(t.TempDir(), "missing.db"), "m"},
	} {
		if code, _, _ := cli(t, args...); code == 0 {
			t.Errorf("strayleaf %s succeeded", strings.Join(args, " "))
		}
	}
	if code, out, _ := cli(t, "models", "help"); code != 0 || !strings.Contains(out, "history") {
		t.Errorf("models help: exit %d, %q", code, out)
	}
}

func TestNameFromBundleFile(t *testing.T) {
	for in, want := range map[string]string{"north@3.bundle": "north", "/x/y/south.bundle": "south", "east": "east", "west.v2.bundle": "west"} {
		if got := nameFromBundleFile(in); got != want {
			t.Errorf("nameFromBundleFile(%q) = %q; expected %q", in, got, want)
		}
	}
}
