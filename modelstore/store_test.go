package modelstore

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"
	berrors "go.etcd.io/bbolt/errors"

	"strayleaf/placement/model"
)

func TestPublishResolveAndRead(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	b1 := synthBundle(t, synthSpec{units: 20, k: 4, witnesses: 5, seed: 1})
	b2 := smallBundle(t, 2)

	r1 := mustPublish(t, s, "tradition-a", b1, PublishMeta{By: "ana", Note: "first cut"})
	if r1 != (Ref{"tradition-a", 1}) || r1.String() != "tradition-a@1" {
		t.Fatalf("first publish gave %v (%s); expected tradition-a@1", r1, r1)
	}
	r2 := mustPublish(t, s, "tradition-a", b2, PublishMeta{By: "ben"})
	if r2.Version != 2 {
		t.Fatalf("second publish gave %v; expected version 2", r2)
	}

	// The first version takes "current"; later publishes leave it alone.
	for ref, want := range map[string]int{"tradition-a": 1, "tradition-a@current": 1, "tradition-a@1": 1, "tradition-a@2": 2} {
		got, err := s.Resolve(ref)
		if err != nil || got.Version != want {
			t.Errorf("Resolve(%q) = %v, %v; expected version %d", ref, got, err, want)
		}
	}

	got, info, err := s.Bundle("tradition-a@1")
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, b1) {
		t.Error("Bundle returned other bytes than were published")
	}
	sum := sha256.Sum256(b1)
	want := VersionInfo{Name: "tradition-a", Version: 1, By: "ana", Note: "first cut", SHA256: hex.EncodeToString(sum[:]), Size: len(b1),
		Summary: Summary{FormatVersion: 1, Groups: 4, Units: 20, Rows: 60, TrainingWitnesses: 5, Objective: 2.5, RelativeError: 0.25, CollationSHA256: "synthetic-1-0"}}
	if info.Created.IsZero() || time.Since(info.Created) > time.Minute {
		t.Errorf("created time %v is not recent", info.Created)
	}
	info.Created = time.Time{}
	if !reflect.DeepEqual(info, want) {
		t.Errorf("version info\n got %+v\nwant %+v", info, want)
	}

	m, r, err := s.Model("tradition-a")
	if err != nil {
		t.Fatal(err)
	}
	if r != r1 || m.K() != 4 || len(m.Proto().Units) != 20 {
		t.Errorf("Model(tradition-a) = %v with k=%d; expected tradition-a@1 with k=4", r, m.K())
	}
	m2, _, err := s.Model("tradition-a@1")
	if err != nil || m2 != m {
		t.Errorf("a second read of the same version should share the cached model (err %v)", err)
	}

	list, err := s.List()
	if err != nil {
		t.Fatal(err)
	}
	if len(list) != 1 || list[0].Name != "tradition-a" || len(list[0].Versions) != 2 || !reflect.DeepEqual(list[0].Aliases, map[string]int{"current": 1}) {
		t.Errorf("List = %+v", list)
	}
	if len(list[0].AliasDetails) != 1 || list[0].AliasDetails[0].By != "ana" {
		t.Errorf("alias details = %+v; expected current set by ana", list[0].AliasDetails)
	}
	vs, err := s.Versions("tradition-a")
	if err != nil || len(vs) != 2 || vs[0].Version != 1 || vs[1].Version != 2 || vs[1].By != "ben" {
		t.Errorf("Versions = %+v, %v", vs, err)
	}
	mustVerify(t, s)

	// A closed store refuses reads, cached or not; reopening finds everything again.
	path := s.Path()
	s.Close()
	if _, _, err := s.Model("tradition-a"); err == nil {
		t.Error("Model on a closed store answered from the cache")
	}
	if s.Close() != nil {
		t.Error("closing twice failed")
	}
	s, err = Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if got, _, err := s.Bundle("tradition-a@2"); err != nil || !bytes.Equal(got, b2) {
		t.Errorf("after reopening, tradition-a@2 reads %d bytes, %v", len(got), err)
	}
}

func TestPublishWithAliasAndFirstCurrent(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	// An explicit alias on the first publish: it and current both point at version 1.
	mustPublish(t, s, "m", smallBundle(t, 1), PublishMeta{By: "ana", Alias: "candidate"})
	mustPublish(t, s, "m", smallBundle(t, 2), PublishMeta{By: "ana", Alias: "candidate"})
	mustPublish(t, s, "m", smallBundle(t, 3), PublishMeta{By: "ana", Alias: "current"})
	mi, err := s.Describe("m")
	if err != nil {
		t.Fatal(err)
	}
	if want := map[string]int{"current": 3, "candidate": 2}; !reflect.DeepEqual(mi.Aliases, want) {
		t.Errorf("aliases = %v; expected %v", mi.Aliases, want)
	}
}

func TestResolveErrors(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	mustPublish(t, s, "m", smallBundle(t, 1), PublishMeta{})
	notFound := map[string]string{
		"other":       `model "other"`,
		"m@7":         `no version 7`,
		"m@candidate": `no alias "candidate"`,
	}
	for ref, says := range notFound {
		_, err := s.Resolve(ref)
		if !errors.Is(err, ErrNotFound) || !strings.Contains(err.Error(), says) {
			t.Errorf("Resolve(%q) = %v; expected ErrNotFound saying %q", ref, err, says)
		}
		if _, _, err := s.Model(ref); !errors.Is(err, ErrNotFound) {
			t.Errorf("Model(%q) = %v; expected ErrNotFound", ref, err)
		}
	}
	for _, ref := range []string{"", "@1", "m@", "m@0", "m@-1", "m@1x", "m@01x", "bad name", "m@cur rent", "-m", "m@@1", strings.Repeat("x", 65)} {
		if _, err := s.Resolve(ref); !errors.Is(err, ErrInvalidName) {
			t.Errorf("Resolve(%q) = %v; expected ErrInvalidName", ref, err)
		}
	}
}

func TestNamesRefused(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	b := smallBundle(t, 1)
	for _, name := range []string{"", "a b", "a@b", "a/b", ".hidden", "ü"} {
		if _, err := s.Publish(name, b, PublishMeta{}); !errors.Is(err, ErrInvalidName) {
			t.Errorf("Publish(%q) = %v; expected ErrInvalidName", name, err)
		}
	}
	mustPublish(t, s, "m", b, PublishMeta{})
	for _, alias := range []string{"", "3", "1st", "a b", "x@y"} {
		if err := s.SetAlias("m", alias, 1, "ana"); !errors.Is(err, ErrInvalidName) {
			t.Errorf("SetAlias(%q) = %v; expected ErrInvalidName", alias, err)
		}
	}
	if _, err := s.Publish("m", b, PublishMeta{Alias: "9"}); !errors.Is(err, ErrInvalidName) {
		t.Errorf("Publish with alias 9 = %v; expected ErrInvalidName", err)
	}
	if err := s.SetAlias("m", "candidate", 2, "ana"); !errors.Is(err, ErrNotFound) {
		t.Errorf("SetAlias to a missing version = %v; expected ErrNotFound", err)
	}
}

// TestVersionsImmutable: no call changes a version that exists, and deleted numbers are not
// given out again.
func TestVersionsImmutable(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	b1 := smallBundle(t, 1)
	mustPublish(t, s, "m", b1, PublishMeta{By: "ana", Note: "one"})
	before, err := s.Info("m@1")
	if err != nil {
		t.Fatal(err)
	}
	mustPublish(t, s, "m", smallBundle(t, 2), PublishMeta{By: "ben", Note: "two", Alias: "current"})
	if err := s.SetAlias("m", "candidate", 1, "cy"); err != nil {
		t.Fatal(err)
	}
	if err := s.SetAlias("m", "candidate", 2, "cy"); err != nil {
		t.Fatal(err)
	}
	if err := s.DeleteVersion("m", 1, "cy"); err != nil {
		t.Fatal(err)
	}
	r := mustPublish(t, s, "m", b1, PublishMeta{By: "ana", Note: "one again"})
	if r.Version != 3 {
		t.Errorf("publishing after deleting version 1 gave %v; expected version 3 (numbers are never reused)", r)
	}
	if _, err := s.Resolve("m@1"); !errors.Is(err, ErrNotFound) {
		t.Errorf("deleted version still resolves: %v", err)
	}
	after, err := s.Info("m@3")
	if err != nil {
		t.Fatal(err)
	}
	if after.SHA256 != before.SHA256 || after.Note != "one again" {
		t.Errorf("the same bytes republished should keep their checksum under a new version: %+v vs %+v", after, before)
	}
	v2, _ := s.Info("m@2")
	if v2.Note != "two" || v2.By != "ben" {
		t.Errorf("version 2 changed: %+v", v2)
	}
}

func TestDeleteAliasedRefused(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	mustPublish(t, s, "m", smallBundle(t, 1), PublishMeta{})
	mustPublish(t, s, "m", smallBundle(t, 2), PublishMeta{})
	if err := s.SetAlias("m", "candidate", 1, "ana"); err != nil {
		t.Fatal(err)
	}
	err := s.DeleteVersion("m", 1, "ana")
	if !errors.Is(err, ErrAliased) || !strings.Contains(err.Error(), "candidate, current") {
		t.Fatalf("deleting an aliased version = %v; expected ErrAliased naming candidate and current", err)
	}
	if _, err := s.Resolve("m@1"); err != nil {
		t.Fatalf("a refused delete removed the version: %v", err)
	}
	if _, _, err := s.Model("m@1"); err != nil {
		t.Fatal(err)
	}
	if err := s.SetAlias("m", "current", 2, "ana"); err != nil {
		t.Fatal(err)
	}
	if err := s.RemoveAlias("m", "candidate", "ana"); err != nil {
		t.Fatal(err)
	}
	if err := s.DeleteVersion("m", 1, "ana"); err != nil {
		t.Fatalf("deleting an unaliased version: %v", err)
	}
	if _, _, err := s.Model("m@1"); !errors.Is(err, ErrNotFound) {
		t.Errorf("Model of a deleted version = %v; expected ErrNotFound", err)
	}
	if err := s.DeleteVersion("m", 1, "ana"); !errors.Is(err, ErrNotFound) {
		t.Errorf("deleting twice = %v; expected ErrNotFound", err)
	}
	if n, _ := s.CacheStats(); n != 1 {
		t.Errorf("%d models cached after the delete; expected 1", n)
	}
}

func TestHistoryRecordsEveryChangeInOrder(t *testing.T) {
	s, _ := openTestStore(t, Options{})
	mustPublish(t, s, "a", smallBundle(t, 1), PublishMeta{By: "ana"})
	mustPublish(t, s, "b", smallBundle(t, 2), PublishMeta{By: "ben"})
	mustPublish(t, s, "a", smallBundle(t, 3), PublishMeta{By: "ana", Alias: "candidate"})
	must := func(err error) {
		t.Helper()
		if err != nil {
			t.Fatal(err)
		}
	}
	must(s.SetAlias("a", "current", 2, "cy"))
	must(s.SetAlias("a", "current", 2, "cy")) // no move, no event
	must(s.RemoveAlias("a", "candidate", "cy"))
	must(s.DeleteVersion("a", 1, "dee"))
	if err := s.DeleteVersion("a", 2, "dee"); err == nil { // refused: no event
		t.Fatal("deleting the current version was allowed")
	}
	var buf bytes.Buffer
	if _, err := s.Export("b@1", &buf); err != nil {
		t.Fatal(err)
	}
	if _, err := s.Import(&buf, "a", PublishMeta{By: "eve"}); err != nil {
		t.Fatal(err)
	}

	type ev struct {
		kind          EventKind
		name          string
		version, from int
		alias, by     string
	}
	want := []ev{
		{EventPublish, "a", 1, 0, "", "ana"},
		{EventAlias, "a", 1, 0, "current", "ana"},
		{EventPublish, "b", 1, 0, "", "ben"},
		{EventAlias, "b", 1, 0, "current", "ben"},
		{EventPublish, "a", 2, 0, "", "ana"},
		{EventAlias, "a", 2, 0, "candidate", "ana"},
		{EventAlias, "a", 2, 1, "current", "cy"},
		{EventUnalias, "a", 2, 2, "candidate", "cy"},
		{EventDelete, "a", 1, 0, "", "dee"},
		{EventImport, "a", 3, 0, "", "eve"},
	}
	all, err := s.History("")
	if err != nil {
		t.Fatal(err)
	}
	var got []ev
	var last time.Time
	for i, e := range all {
		got = append(got, ev{e.Kind, e.Name, e.Version, e.From, e.Alias, e.By})
		if e.Seq != uint64(i+1) {
			t.Errorf("event %d has sequence %d", i, e.Seq)
		}
		if e.Time.Before(last) {
			t.Errorf("event %d is dated before the one before it", i)
		}
		last = e.Time
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("history\n got %v\nwant %v", got, want)
	}
	onlyB, err := s.History("b")
	if err != nil || len(onlyB) != 2 || onlyB[0].Seq != 3 || onlyB[1].Seq != 4 {
		t.Errorf("History(b) = %+v, %v; expected events 3 and 4", onlyB, err)
	}
	if !strings.Contains(all[len(all)-1].Detail, "imported") || !strings.Contains(all[0].Detail, "sha256 ") {
		t.Errorf("event details: %q, %q", all[0].Detail, all[len(all)-1].Detail)
	}
}

func TestReadOnlyMode(t *testing.T) {
	s, path := openTestStore(t, Options{})
	b := smallBundle(t, 1)
	mustPublish(t, s, "m", b, PublishMeta{})
	s.Close()

	r1, err := Open(path, Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer r1.Close()
	r2, err := Open(path, Options{ReadOnly: true, LockTimeout: 200 * time.Millisecond})
	if err != nil {
		t.Fatalf("a second read-only open beside the first: %v", err)
	}
	defer r2.Close()
	if _, _, err := r2.Model("m"); err != nil {
		t.Fatal(err)
	}
	mustVerify(t, r2)
	writes := map[string]error{
		"Publish":       func() error { _, err := r1.Publish("m", b, PublishMeta{}); return err }(),
		"Import":        func() error { _, err := r1.Import(bytes.NewReader(b), "m", PublishMeta{}); return err }(),
		"SetAlias":      r1.SetAlias("m", "candidate", 1, "ana"),
		"RemoveAlias":   r1.RemoveAlias("m", "current", "ana"),
		"DeleteVersion": r1.DeleteVersion("m", 1, "ana"),
	}
	for call, err := range writes {
		if !errors.Is(err, ErrReadOnly) {
			t.Errorf("%s on a read-only store = %v; expected ErrReadOnly", call, err)
		}
	}
	// A writer cannot open while readers hold the file.
	_, err = Open(path, Options{LockTimeout: 100 * time.Millisecond})
	if !errors.Is(err, ErrLocked) {
		t.Errorf("writable open beside readers = %v; expected ErrLocked", err)
	}
	if _, err := Open(filepath.Join(t.TempDir(), "missing.db"), Options{ReadOnly: true}); err == nil {
		t.Error("read-only open of a missing file succeeded")
	}
}

func TestLockTimeoutMessage(t *testing.T) {
	s, path := openTestStore(t, Options{})
	_ = s
	start := time.Now()
	_, err := Open(path, Options{LockTimeout: 150 * time.Millisecond})
	if !errors.Is(err, ErrLocked) || !errors.Is(err, berrors.ErrTimeout) {
		t.Fatalf("second writable open = %v; expected ErrLocked wrapping bbolt's timeout", err)
	}
	for _, says := range []string{path, "locked by another process", "150ms", "read-only"} {
		if !strings.Contains(err.Error(), says) {
			t.Errorf("lock message %q does not say %q", err, says)
		}
	}
	if waited := time.Since(start); waited > 5*time.Second {
		t.Errorf("open waited %v for a 150ms lock timeout", waited)
	}
	_, err = Open(path, Options{ReadOnly: true, LockTimeout: 100 * time.Millisecond})
	if !errors.Is(err, ErrLocked) {
		t.Errorf("read-only open beside a writer = %v; expected ErrLocked", err)
	}
}

func TestOpenRefusesOtherFiles(t *testing.T) {
	dir := t.TempDir()
	other := filepath.Join(dir, "other.db")
	db, err := bolt.Open(other, 0o600, &bolt.Options{Timeout: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	db.Update(func(tx *bolt.Tx) error { _, err := tx.CreateBucket([]byte("something")); return err })
	db.Close()
	if _, err := Open(other, Options{}); !errors.Is(err, ErrNotStore) {
		t.Errorf("opening a foreign bbolt file = %v; expected ErrNotStore", err)
	}

	s, path := openTestStore(t, Options{})
	s.Close()
	db, err = bolt.Open(path, 0o600, &bolt.Options{Timeout: time.Second})
	if err != nil {
		t.Fatal(err)
	}
	db.Update(func(tx *bolt.Tx) error { return tx.Bucket(bucketMeta).Put(keySchema, schemaBytes(2)) })
	db.Close()
	_, err = Open(path, Options{})
	if !errors.Is(err, ErrNotStore) || !strings.Contains(err.Error(), "layout version 2") {
		t.Errorf("opening a newer layout = %v; expected ErrNotStore naming layout version 2", err)
	}

	empty := filepath.Join(dir, "new.db")
	if _, err := Open(empty, Options{ReadOnly: true}); err == nil {
		t.Error("read-only open of a missing file succeeded")
	}
}

func TestCacheBoundAndLRU(t *testing.T) {
	spec := func(seed uint64) synthSpec { return synthSpec{units: 40, k: 3, witnesses: 2, seed: seed} }
	probe, err := model.Decode(synthBundle(t, spec(9)))
	if err != nil {
		t.Fatal(err)
	}
	size := probe.SizeBytes()
	s, _ := openTestStore(t, Options{CacheBytes: 2*size + size/2})
	for i := uint64(1); i <= 3; i++ {
		mustPublish(t, s, "m", synthBundle(t, spec(i)), PublishMeta{})
	}
	if n, b := s.CacheStats(); n != 2 || b > 2*size+size/2 {
		t.Errorf("after three publishes %d models (%d bytes) are cached; expected 2 within %d", n, b, 2*size+size/2)
	}
	// Versions 2 and 3 are cached; touch 2, load 1: 3 is the least recently used and goes.
	m2, _, _ := s.Model("m@2")
	m1, _, _ := s.Model("m@1")
	if again, _, _ := s.Model("m@2"); again != m2 {
		t.Error("m@2 was evicted although it was used more recently than m@3")
	}
	if again, _, _ := s.Model("m@1"); again != m1 {
		t.Error("m@1 was not kept")
	}
	if n, _ := s.CacheStats(); n != 2 {
		t.Errorf("%d models cached; expected 2", n)
	}

	off, _ := openTestStore(t, Options{CacheBytes: -1})
	mustPublish(t, off, "m", synthBundle(t, spec(1)), PublishMeta{})
	a, _, _ := off.Model("m")
	b, _, _ := off.Model("m")
	if a == b {
		t.Error("with the cache off, two loads returned the same decoded model")
	}
	if n, _ := off.CacheStats(); n != 0 {
		t.Errorf("with the cache off %d models are cached", n)
	}
}
