package collation

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"testing"
)

// benchCollation is an invented collation of nw witnesses and nu units, three readings a unit,
// one cell in ten a lacuna (seeded).
func benchCollation(b *testing.B, nw, nu int) *Collation {
	rng := rand.New(rand.NewPCG(1, 2))
	var bld Builder
	for u := 0; u < nu; u++ {
		id := fmt.Sprintf("%d.%d", u/50+1, u%50+1)
		for w := 0; w < nw; w++ {
			if rng.IntN(10) == 0 {
				continue
			}
			if err := bld.Add(fmt.Sprintf("W%03d", w), id, fmt.Sprintf("rdg%d", rng.IntN(3)), fmt.Sprintf("S%d", u/50+1)); err != nil {
				b.Fatal(err)
			}
		}
	}
	return bld.Build()
}

func BenchmarkReadCSV(b *testing.B) {
	var buf bytes.Buffer
	if err := WriteCSV(&buf, benchCollation(b, 100, 1000)); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		if _, err := ReadCSV(bytes.NewReader(data), "bench.csv"); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkWriteCSV(b *testing.B) {
	c := benchCollation(b, 100, 1000)
	var buf bytes.Buffer
	for b.Loop() {
		buf.Reset()
		if err := WriteCSV(&buf, c); err != nil {
			b.Fatal(err)
		}
	}
	b.SetBytes(int64(buf.Len()))
}
