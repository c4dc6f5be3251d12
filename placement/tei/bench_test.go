package tei

import (
	"bytes"
	"testing"
)

// BenchmarkRead1000x5000 reads a generated apparatus of 1,000 witnesses x 5,000 units (3-4
// readings per unit, some lacunae), written by WriteApparatus. Goal: under 10 s and 1 GiB.
// Besides ns/op it reports cpu-s/op, the process's CPU time per read (all threads, the
// garbage collector's included), which a busy shared machine disturbs less than wall time.
func BenchmarkRead1000x5000(b *testing.B) {
	c := randomCollation(42, 1000, 5000)
	var buf bytes.Buffer
	if err := WriteApparatus(&buf, c); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	b.Logf("input %.1f MB, %d lacuna cells", float64(len(data))/1e6, c.Lacunae())
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := cpuSeconds()
	for b.Loop() {
		got, _, err := Read(bytes.NewReader(data), "bench.xml", Options{})
		if err != nil {
			b.Fatal(err)
		}
		if got.NumWitnesses() != 1000 || got.NumUnits() != 5000 {
			b.Fatalf("read %d x %d", got.NumWitnesses(), got.NumUnits())
		}
	}
	b.ReportMetric((cpuSeconds()-cpu0)/float64(b.N), "cpu-s/op")
}
