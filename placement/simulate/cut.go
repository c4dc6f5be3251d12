package simulate

import (
	"fmt"
	"math/rand/v2"

	"strayleaf/placement/collation"
)

// CutContiguous returns a copy of row (a witness's reading indexes, collation.Lacuna where it
// has none) of which only a window of n consecutive units survives, the window's start drawn
// uniformly: a leaf of the witness. Units the witness already lacked inside the window stay
// lacunae. n is clamped to [0, len(row)]. The row itself is not changed.
func CutContiguous(row []int32, n int, rng *rand.Rand) []int32 {
	n = min(max(n, 0), len(row))
	return CutRange(row, intN(rng, len(row)-n+1), n)
}

// CutRange returns a copy of row of which only the n units from start survive (the window is
// clipped to the row).
func CutRange(row []int32, start, n int) []int32 {
	out := make([]int32, len(row))
	for i := range out {
		out[i] = collation.Lacuna
	}
	lo := min(max(start, 0), len(row))
	hi := min(max(start+n, lo), len(row))
	copy(out[lo:hi], row[lo:hi])
	return out
}

// CutScattered returns a copy of row of which only n of its extant units survive, chosen
// uniformly without replacement (all of them if it has no more than n): readings checked here
// and there, as on a damaged leaf or in a cataloguer's sample. The row itself is not changed.
func CutScattered(row []int32, n int, rng *rand.Rand) []int32 {
	var extant []int
	for u, r := range row {
		if r != collation.Lacuna {
			extant = append(extant, u)
		}
	}
	n = min(max(n, 0), len(extant))
	// Partial Fisher-Yates: the first n of extant become a uniform sample.
	for i := 0; i < n; i++ {
		j := i + intN(rng, len(extant)-i)
		extant[i], extant[j] = extant[j], extant[i]
	}
	out := make([]int32, len(row))
	for i := range out {
		out[i] = collation.Lacuna
	}
	for _, u := range extant[:n] {
		out[u] = row[u]
	}
	return out
}

// ExtantRuns returns the maximal runs of consecutive units at which row has a reading.
func ExtantRuns(row []int32) []Run { return runsWhere(row, true) }

// LacunaRuns returns the maximal runs of consecutive units at which row has no reading.
func LacunaRuns(row []int32) []Run { return runsWhere(row, false) }

func runsWhere(row []int32, extant bool) []Run {
	var runs []Run
	start := -1
	for u, r := range row {
		if (r != collation.Lacuna) == extant {
			if start < 0 {
				start = u
			}
			continue
		}
		if start >= 0 {
			runs = append(runs, Run{Start: start, End: u})
			start = -1
		}
	}
	if start >= 0 {
		runs = append(runs, Run{Start: start, End: len(row)})
	}
	return runs
}

// Rebuild returns a collation over the units of c (same unit IDs, sections and order, so unit
// indexes carry over) whose witnesses are the given sigla with the given rows of reading
// indexes into c's units. Readings are renumbered by first appearance, as collation.Builder does;
// units nobody reads are kept, with no readings.
func Rebuild(c *collation.Collation, sigla []string, rows [][]int32) (*collation.Collation, error) {
	if len(sigla) != len(rows) {
		return nil, fmt.Errorf("rebuilding collation: %d sigla for %d rows", len(sigla), len(rows))
	}
	var b collation.Builder
	units := c.Units()
	for _, un := range units {
		if _, err := b.AddUnit(un.ID, un.Section); err != nil {
			return nil, fmt.Errorf("rebuilding collation: %w", err)
		}
	}
	seen := make(map[string]bool, len(sigla))
	for i, siglum := range sigla {
		if siglum == "" || seen[siglum] {
			return nil, fmt.Errorf("rebuilding collation: siglum %d (%q) is empty or given twice", i, siglum)
		}
		seen[siglum] = true
		row := rows[i]
		if len(row) != len(units) {
			return nil, fmt.Errorf("rebuilding collation: witness %s has %d units; the collation has %d", siglum, len(row), len(units))
		}
		b.AddWitness(siglum)
		for u, r := range row {
			if r == collation.Lacuna {
				continue
			}
			un := &units[u]
			if r < 0 || int(r) >= len(un.Readings) {
				return nil, fmt.Errorf("rebuilding collation: witness %s has reading %d at unit %s, which has %d readings", siglum, r, un.ID, len(un.Readings))
			}
			if err := b.Add(siglum, un.ID, un.Readings[r], un.Section); err != nil {
				return nil, fmt.Errorf("rebuilding collation: %w", err)
			}
		}
	}
	return b.Build(), nil
}

// Split parts a tradition into the witnesses not named in held and those named, each with its
// own collation (over all units, see Rebuild) and truth (group member counts recounted; any
// Fragments of t stay with kept). It fails
// if a siglum in held is not a witness of t.
func (t *Tradition) Split(held []string) (kept, out *Tradition, err error) {
	c := t.Collation
	if len(t.Truth.Witnesses) != c.NumWitnesses() || len(t.Sources) != c.NumWitnesses() {
		return nil, nil, fmt.Errorf("splitting tradition: the truth has %d witnesses and %d source rows, the collation %d witnesses", len(t.Truth.Witnesses), len(t.Sources), c.NumWitnesses())
	}
	isHeld := make(map[string]bool, len(held))
	for _, s := range held {
		if _, ok := c.WitnessIndex(s); !ok {
			return nil, nil, fmt.Errorf("splitting tradition: %q is not a witness", s)
		}
		isHeld[s] = true
	}
	part := func(want bool) (*Tradition, error) {
		var sigla []string
		var rows [][]int32
		var sources [][]int
		truth := t.Truth
		truth.Groups = append([]GroupTruth(nil), t.Truth.Groups...)
		truth.Witnesses = nil
		for w, s := range c.Witnesses() {
			if isHeld[s] != want {
				continue
			}
			sigla = append(sigla, s)
			rows = append(rows, c.Row(w))
			sources = append(sources, t.Sources[w])
			truth.Witnesses = append(truth.Witnesses, t.Truth.Witnesses[w])
		}
		if want {
			truth.Fragments = nil
		}
		truth.countMembers()
		col, err := Rebuild(c, sigla, rows)
		if err != nil {
			return nil, fmt.Errorf("splitting tradition: %w", err)
		}
		return &Tradition{Collation: col, Truth: truth, Sources: sources}, nil
	}
	if kept, err = part(false); err != nil {
		return nil, nil, err
	}
	if out, err = part(true); err != nil {
		return nil, nil, err
	}
	return kept, out, nil
}

// FragmentTruth returns the truth of a fragment cut from witness w of t: row is what survives
// (reading indexes of t's collation, as CutContiguous or CutScattered give them) and form its
// Form. The fragment keeps the witness's group, shares and any switch; its kind is
// KindFragmentary, Drawn and Extant are counted over the surviving units, and for a leaf or
// leaves the surviving runs are recorded.
func (t *Tradition) FragmentTruth(w int, siglum string, row []int32, form string) (WitnessTruth, error) {
	if w < 0 || w >= len(t.Truth.Witnesses) || w >= len(t.Sources) {
		return WitnessTruth{}, fmt.Errorf("fragment %s: no witness %d", siglum, w)
	}
	src := t.Sources[w]
	if len(row) != len(src) {
		return WitnessTruth{}, fmt.Errorf("fragment %s: row has %d units; the collation has %d", siglum, len(row), len(src))
	}
	wt := t.Truth.Witnesses[w]
	wt.Siglum = siglum
	wt.Kind = KindFragmentary
	wt.Shares = append([]float64(nil), wt.Shares...)
	wt.Drawn = make([]int, len(wt.Shares))
	wt.Extant = 0
	wt.Lacunae = nil
	for u, r := range row {
		if r != collation.Lacuna {
			wt.Drawn[src[u]]++
			wt.Extant++
		}
	}
	wt.Fragment = &Fragment{Form: form}
	if form != FormScattered {
		wt.Fragment.Runs = ExtantRuns(row)
	}
	return wt, nil
}
