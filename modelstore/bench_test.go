package modelstore

import (
	"path/filepath"
	"testing"

	"strayleaf/internal/benchcpu"
)

// benchSpec is a 3,000 x 12 model: 1,000 units of three readings, 12 groups, 100 training
// witnesses.
var benchSpec = synthSpec{units: 1000, k: 12, witnesses: 100, seed: 1}

func benchStore(b *testing.B, opt Options) *Store {
	b.Helper()
	bundle := synthBundle(b, benchSpec)
	s, err := Open(filepath.Join(b.TempDir(), "bench.db"), opt)
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { s.Close() })
	if _, err := s.Publish("bench", bundle, PublishMeta{By: "bench"}); err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { b.ReportMetric(float64(len(bundle)), "bundle-bytes") })
	return s
}

// BenchmarkModelCached: a cached model by reference (goal well under 1 µs).
func BenchmarkModelCached(b *testing.B) {
	for _, ref := range []string{"bench@current", "bench", "bench@1"} {
		b.Run(ref, func(b *testing.B) {
			s := benchStore(b, Options{})
			if _, _, err := s.Model(ref); err != nil {
				b.Fatal(err)
			}
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				if _, _, err := s.Model(ref); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkModelCachedParallel: cached lookups from all cores at once.
func BenchmarkModelCachedParallel(b *testing.B) {
	s := benchStore(b, Options{})
	if _, _, err := s.Model("bench@current"); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	b.RunParallel(func(pb *testing.PB) {
		for pb.Next() {
			if _, _, err := s.Model("bench@current"); err != nil {
				b.Error(err)
				return
			}
		}
	})
}

// BenchmarkModelCold: a cold load of the 3,000 x 12 model by reference (goal well under 10 ms):
// resolve, read the bundle out of bbolt, check its SHA-256, decode and build the placement
// indexes. The cache is off, so every iteration is cold.
func BenchmarkModelCold(b *testing.B) {
	s := benchStore(b, Options{CacheBytes: -1})
	b.ReportAllocs()
	b.ResetTimer()
	clock := benchcpu.Start()
	for b.Loop() {
		if _, _, err := s.Model("bench@current"); err != nil {
			b.Fatal(err)
		}
	}
	clock.Report(b)
}

// BenchmarkBundleRead: reading and checking the bundle bytes alone, the store's share of a cold
// load.
func BenchmarkBundleRead(b *testing.B) {
	s := benchStore(b, Options{CacheBytes: -1})
	b.ReportAllocs()
	b.ResetTimer()
	clock := benchcpu.Start()
	for b.Loop() {
		if _, _, err := s.Bundle("bench@1"); err != nil {
			b.Fatal(err)
		}
	}
	clock.Report(b)
}
