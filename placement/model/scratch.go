package model

import (
	"strayleaf/placement"
)

// placeScratch is the per-call memory of a placement: everything Place needs besides what it
// returns. Each Model pools its own (Model.scratch), so concurrent placements each take one.
type placeScratch struct {
	// seen[u] == gen marks unit u as given in the current witness; at[u] is then the index of
	// its reading (for the message about a unit given twice).
	seen []uint32
	at   []int32
	gen  uint32
	obs  []placement.Observation
	used []int // units of the used observations
	ll   []float64
	// pa, pb are the reading probabilities of the mixture test's two groups.
	pa, pb []float64
	sep    sepScratch
}

// getScratch takes a placeScratch from m's pool, sized for m.
func (m *Model) getScratch() *placeScratch {
	if s, ok := m.scratch.Get().(*placeScratch); ok {
		return s
	}
	k, nu := m.K(), len(m.pb.Units)
	return &placeScratch{
		seen: make([]uint32, nu), at: make([]int32, nu), ll: make([]float64, k),
		sep: sepScratch{set: make([]int, 0, k), idx: make([]int, k*k), gqq: make([]float64, k*k), chol: make([]float64, k*k), hq: make([]float64, k),
			meat: make([]float64, k*k), score: make([]float64, k), y: make([]float64, k)},
	}
}

// putScratch returns s to m's pool.
func (m *Model) putScratch(s *placeScratch) { m.scratch.Put(s) }

// nextGen starts a new witness in s.seen and returns its generation.
func (s *placeScratch) nextGen() uint32 {
	s.gen++
	if s.gen == 0 { // wrapped: old marks could alias the new generation
		clear(s.seen)
		s.gen = 1
	}
	return s.gen
}
