package simulate

import (
	"math"
	"math/bits"
	"math/rand/v2"
)

// The simulator draws nothing from its source but Uint64 and maps those draws to integers and
// floats with the helpers below, so that its output is fixed by the PCG generator alone (whose
// algorithm, PCG-DXSM, is specified) and not by how a Go release maps draws in Rand.IntN and the
// like.

// newRand returns the generator for a seed: PCG with the seed as state and a fixed stream.
func newRand(seed uint64) *rand.Rand {
	return rand.New(rand.NewPCG(seed, 0x7374726179_6c6561)) // the stream: the bytes of "straylea"
}

// intN returns a uniform integer in [0, n) for n > 0, by Lemire's multiply-and-reject method
// (Lemire 2019, ACM TOMACS 29(1), "Fast random integer generation in an interval"; from
// memory).
func intN(rng *rand.Rand, n int) int {
	if n <= 1 {
		return 0
	}
	un := uint64(n)
	hi, lo := bits.Mul64(rng.Uint64(), un)
	if lo < un {
		thresh := -un % un
		for lo < thresh {
			hi, lo = bits.Mul64(rng.Uint64(), un)
		}
	}
	return int(hi)
}

// float01 returns a uniform float64 in [0, 1) with 53 random bits.
func float01(rng *rand.Rand) float64 {
	return float64(rng.Uint64()>>11) * 0x1p-53
}

// chance reports true with probability p.
func chance(rng *rand.Rand, p float64) bool { return float01(rng) < p }

// poisson draws a Poisson(lambda) count by Knuth's product-of-uniforms method (Knuth, TAOCP
// vol. 2, 3.4.1, from memory), fine for the small means used here.
func poisson(rng *rand.Rand, lambda float64) int {
	if lambda <= 0 {
		return 0
	}
	limit := math.Exp(-lambda)
	k, p := 0, 1.0
	for {
		p *= float01(rng)
		if p <= limit {
			return k
		}
		k++
	}
}

// shuffle permutes s uniformly (Fisher-Yates; Knuth, TAOCP vol. 2, 3.4.2, Algorithm P, from
// memory).
func shuffle[T any](rng *rand.Rand, s []T) {
	for i := len(s) - 1; i > 0; i-- {
		j := intN(rng, i+1)
		s[i], s[j] = s[j], s[i]
	}
}

// otherThan returns a uniform index in [0, n) different from x (n >= 2, 0 <= x < n).
func otherThan(rng *rand.Rand, n, x int) int {
	k := intN(rng, n-1)
	if k >= x {
		k++
	}
	return k
}

// IntN returns a uniform integer in [0, n) (0 if n <= 1) drawn from rng by the same mapping the
// simulator uses, which depends on rng.Uint64 alone: code that builds simulated data on top of
// this package can use it to stay reproducible across Go releases.
func IntN(rng *rand.Rand, n int) int { return intN(rng, n) }

// NewRand returns the generator the simulator uses for a seed (PCG with a fixed stream).
func NewRand(seed uint64) *rand.Rand { return newRand(seed) }
