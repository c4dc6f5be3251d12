package modelstore

import (
	"fmt"
	"sync"
	"sync/atomic"
	"testing"

	"strayleaf/placement/model"
)

// checkStamp reports whether m is wholly the stamped model of version v: every profile entry is v
// or 0 in the stamp pattern, and the collation checksum field names v.
func checkStamp(m *model.Model, v int) error {
	p := m.Proto()
	if want := fmt.Sprintf("synthetic-0-%d", v); p.CollationSha256 != want {
		return fmt.Errorf("collation field %q; expected %q", p.CollationSha256, want)
	}
	k := int(p.GroupCount)
	for i := range p.Rows {
		for j := 0; j < k; j++ {
			want := 0.0
			if j == i%3%k {
				want = float64(v)
			}
			if got := m.W().At(i, j); got != want {
				return fmt.Errorf("W[%d,%d] = %v; expected %v", i, j, got, want)
			}
		}
	}
	return nil
}

// TestConcurrentReadersSeeWholeVersions: readers place against name@current while a writer
// publishes new versions and moves the alias back and forth. Each version's profile encodes its
// version number, so a reader can tell a whole version from a mix. Run it under -race.
func TestConcurrentReadersSeeWholeVersions(t *testing.T) {
	stamped := func(v int) []byte { return synthBundle(t, synthSpec{units: 30, k: 3, stamp: v}) }
	probe, err := model.Decode(stamped(1))
	if err != nil {
		t.Fatal(err)
	}
	// Room for three models: readers also load evicted versions cold, concurrently.
	s, _ := openTestStore(t, Options{CacheBytes: 3 * probe.SizeBytes()})
	mustPublish(t, s, "cc", stamped(1), PublishMeta{By: "writer"})
	const versions = 24
	bundles := make([][]byte, versions+1)
	for v := 2; v <= versions; v++ {
		bundles[v] = stamped(v)
	}

	var done atomic.Bool
	var reads atomic.Int64
	var wg sync.WaitGroup
	errs := make(chan error, 16)
	fail := func(err error) {
		select {
		case errs <- err:
		default:
		}
	}
	readings := make([]model.Reading, 30)
	for u := range readings {
		readings[u] = model.Reading{Unit: fmt.Sprintf("u%04d", u+1), Reading: "a"}
	}
	for r := 0; r < 4; r++ {
		wg.Add(1)
		go func(r int) {
			defer wg.Done()
			ref := "cc@current"
			if r%2 == 1 {
				ref = "cc"
			}
			for n := 0; !done.Load() || n < 20; n++ {
				m, got, err := s.Model(ref)
				if err != nil {
					fail(fmt.Errorf("reader %d: %w", r, err))
					return
				}
				if err := checkStamp(m, got.Version); err != nil {
					fail(fmt.Errorf("reader %d got %s with a mixed model: %w", r, got, err))
					return
				}
				p, err := m.Place("F1", readings, nil)
				if err != nil {
					fail(fmt.Errorf("reader %d placing against %s: %w", r, got, err))
					return
				}
				if p.BestGroup != "G1" {
					fail(fmt.Errorf("reader %d: a witness with reading a everywhere placed in %s against %s", r, p.BestGroup, got))
					return
				}
				if n%8 == 0 {
					b, info, err := s.Bundle(ref)
					if err != nil {
						fail(fmt.Errorf("reader %d: %w", r, err))
						return
					}
					bm, err := model.Decode(b)
					if err != nil {
						fail(err)
						return
					}
					if err := checkStamp(bm, info.Version); err != nil {
						fail(fmt.Errorf("reader %d: bundle of %s: %w", r, info.Ref(), err))
						return
					}
				}
				reads.Add(1)
			}
		}(r)
	}

	for v := 2; v <= versions; v++ {
		meta := PublishMeta{By: "writer"}
		if v%2 == 0 {
			meta.Alias = DefaultAlias // publish and move in one transaction
		}
		r, err := s.Publish("cc", bundles[v], meta)
		if err != nil {
			t.Fatal(err)
		}
		if v%2 == 1 {
			if err := s.SetAlias("cc", DefaultAlias, r.Version, "writer"); err != nil {
				t.Fatal(err)
			}
		}
		if v%5 == 0 { // and back to an older one
			if err := s.SetAlias("cc", DefaultAlias, v/2, "writer"); err != nil {
				t.Fatal(err)
			}
		}
	}
	done.Store(true)
	wg.Wait()
	close(errs)
	for err := range errs {
		t.Error(err)
	}
	if reads.Load() < 80 {
		t.Errorf("only %d reads", reads.Load())
	}
	if _, r, err := s.Model("cc"); err != nil || r.Version != versions {
		t.Errorf("after the writer: cc resolves to %v, %v; expected version %d", r, err, versions)
	}
	mustVerify(t, s)
}
