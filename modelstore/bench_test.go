package modelstore

import (
	"path/filepath"
	"runtime"
	"syscall"
	"testing"
	"time"
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
	clock := startCPU()
	for b.Loop() {
		if _, _, err := s.Model("bench@current"); err != nil {
			b.Fatal(err)
		}
	}
	clock.report(b)
}

// BenchmarkBundleRead: reading and checking the bundle bytes alone, the store's share of a cold
// load.
func BenchmarkBundleRead(b *testing.B) {
	s := benchStore(b, Options{CacheBytes: -1})
	b.ReportAllocs()
	b.ResetTimer()
	clock := startCPU()
	for b.Loop() {
		if _, _, err := s.Bundle("bench@1"); err != nil {
			b.Fatal(err)
		}
	}
	clock.report(b)
}

// cpuClock measures the CPU time of the benchmarking thread, reported beside ns/op as
// cpu-ns/op: on a shared machine wall time also counts the time other processes held the core.
// (The garbage collector's background work on other threads is not in it.)
type cpuClock struct{ start time.Duration }

func threadCPU() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(1 /* RUSAGE_THREAD on Linux */, &ru); err != nil {
		return -1
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

func startCPU() cpuClock {
	runtime.LockOSThread()
	return cpuClock{start: threadCPU()}
}

func (c cpuClock) report(b *testing.B) {
	end := threadCPU()
	runtime.UnlockOSThread()
	if c.start >= 0 && end >= 0 && b.N > 0 {
		b.ReportMetric(float64(end-c.start)/float64(b.N), "cpu-ns/op")
	}
}
