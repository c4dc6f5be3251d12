package simulate

import (
	"bytes"
	"math/rand/v2"
	"reflect"
	"slices"
	"testing"

	"strayleaf/placement/collation"
)

const L = collation.Lacuna

func extant(row []int32) int { // units with a reading
	n := 0
	for _, r := range row {
		if r != L {
			n++
		}
	}
	return n
}

func TestCutContiguousKeepsOneWindow(t *testing.T) {
	row := []int32{0, 1, 2, L, 1, 0, 3, 2, 1, 0}
	orig := slices.Clone(row)
	rng := rand.New(rand.NewPCG(1, 2))
	starts := map[int]bool{}
	for range 200 {
		out := CutContiguous(row, 4, rng)
		// The cut is some window of 4 units lying wholly in the row.
		start := -1
		for s := 0; s+4 <= len(row); s++ {
			if reflect.DeepEqual(out, CutRange(row, s, 4)) {
				start = s
			}
		}
		if start < 0 {
			t.Fatalf("cut %v of %v is no window of 4 units", out, row)
		}
		starts[start] = true
	}
	if len(starts) != 7 {
		t.Errorf("in 200 cuts windows started at %d of the 7 places", len(starts))
	}
	if !reflect.DeepEqual(row, orig) {
		t.Fatal("CutContiguous changed its input")
	}
	if got := CutContiguous(row, 99, rng); !reflect.DeepEqual(got, row) {
		t.Errorf("a window longer than the row should keep it whole, got %v", got)
	}
	if got := extant(CutContiguous(row, -3, rng)); got != 0 {
		t.Errorf("a negative window kept %d units", got)
	}
}

func TestCutRange(t *testing.T) {
	row := []int32{5, 6, 7, 8, 9}
	for _, tc := range []struct {
		start, n int
		want     []int32
	}{
		{1, 2, []int32{L, 6, 7, L, L}},
		{3, 10, []int32{L, L, L, 8, 9}},
		{-2, 3, []int32{5, L, L, L, L}},
		{7, 2, []int32{L, L, L, L, L}},
	} {
		if got := CutRange(row, tc.start, tc.n); !reflect.DeepEqual(got, tc.want) {
			t.Errorf("CutRange(%d, %d) = %v, want %v", tc.start, tc.n, got, tc.want)
		}
	}
}

func TestCutScatteredKeepsExtantUnits(t *testing.T) {
	row := make([]int32, 100)
	for u := range row {
		row[u] = int32(u % 3)
		if u%10 == 0 {
			row[u] = L
		}
	}
	rng := rand.New(rand.NewPCG(3, 4))
	hits := make([]int, len(row))
	for range 300 {
		out := CutScattered(row, 30, rng)
		if extant(out) != 30 {
			t.Fatalf("kept %d units, want 30", extant(out))
		}
		for u := range out {
			if out[u] != L {
				if out[u] != row[u] {
					t.Fatalf("unit %d changed", u)
				}
				hits[u]++
			}
		}
	}
	// Every extant unit is drawn with probability 30/90 in each cut: 100 expected of 300.
	for u, h := range hits {
		if row[u] == L && h != 0 {
			t.Errorf("lacuna at unit %d was kept", u)
		}
		if row[u] != L && (h < 60 || h > 140) {
			t.Errorf("unit %d kept %d times of 300; expected about 100", u, h)
		}
	}
	if got := extant(CutScattered(row, 500, rng)); got != 90 {
		t.Errorf("asking for more units than extant kept %d, want all 90", got)
	}
}

func TestRuns(t *testing.T) {
	row := []int32{L, 0, 1, L, L, 2, L}
	if got, want := ExtantRuns(row), []Run{{1, 3}, {5, 6}}; !reflect.DeepEqual(got, want) {
		t.Errorf("ExtantRuns = %v, want %v", got, want)
	}
	if got, want := LacunaRuns(row), []Run{{0, 1}, {3, 5}, {6, 7}}; !reflect.DeepEqual(got, want) {
		t.Errorf("LacunaRuns = %v, want %v", got, want)
	}
	if got := mergeRuns([]Run{{5, 8}, {0, 2}, {2, 3}, {6, 9}, {11, 12}}); !reflect.DeepEqual(got, []Run{{0, 3}, {5, 9}, {11, 12}}) {
		t.Errorf("mergeRuns = %v", got)
	}
}

func TestSplitAndRebuildKeepReadings(t *testing.T) {
	tr := mustSimulate(t, smallConfig(4))
	c := tr.Collation
	held := []string{c.Witness(3), c.Witness(10)}
	kept, out, err := tr.Split(held)
	if err != nil {
		t.Fatal(err)
	}
	if kept.Collation.NumWitnesses() != c.NumWitnesses()-2 || out.Collation.NumWitnesses() != 2 {
		t.Fatalf("split into %d and %d witnesses", kept.Collation.NumWitnesses(), out.Collation.NumWitnesses())
	}
	for _, part := range []*Tradition{kept, out} {
		pc := part.Collation
		if pc.NumUnits() != c.NumUnits() {
			t.Fatalf("split part has %d units, want %d", pc.NumUnits(), c.NumUnits())
		}
		members := 0
		for w := range pc.NumWitnesses() {
			s := pc.Witness(w)
			if part.Truth.Witnesses[w].Siglum != s {
				t.Fatalf("truth %d is %s, witness is %s", w, part.Truth.Witnesses[w].Siglum, s)
			}
			ow, _ := c.WitnessIndex(s)
			for u := range pc.NumUnits() {
				a, b := pc.Reading(w, u), c.Reading(ow, u)
				if (a == L) != (b == L) || (a != L && pc.Unit(u).Readings[a] != c.Unit(u).Readings[b]) {
					t.Fatalf("%s at %s: reading changed by split", s, c.Unit(u).ID)
				}
			}
		}
		for _, g := range part.Truth.Groups {
			members += g.Members
		}
		if members != pc.NumWitnesses() {
			t.Errorf("members add to %d for %d witnesses", members, pc.NumWitnesses())
		}
	}
	// The parts written out together hold the same cells as the whole.
	var whole, a, b bytes.Buffer
	_ = collation.WriteCSV(&whole, c)
	_ = collation.WriteCSV(&a, kept.Collation)
	_ = collation.WriteCSV(&b, out.Collation)
	if whole.Len() != a.Len()+b.Len()-len("witness,unit,reading,section\n") {
		t.Errorf("split CSVs have %d+%d bytes, whole %d", a.Len(), b.Len(), whole.Len())
	}
	// A fragment cut from a mixed witness keeps its shares and counts its draws anew.
	for w, wt := range tr.Truth.Witnesses {
		if wt.Kind != KindMixed {
			continue
		}
		row := CutRange(c.Row(w), 20, 40)
		ft, err := tr.FragmentTruth(w, "F1", row, FormLeaf)
		if err != nil {
			t.Fatal(err)
		}
		want := make([]int, len(wt.Drawn))
		for u := 20; u < 60; u++ {
			if row[u] != L {
				want[tr.Sources[w][u]]++
			}
		}
		if ft.Kind != KindFragmentary || ft.Siglum != "F1" || !reflect.DeepEqual(ft.Drawn, want) || ft.Extant != extant(row) ||
			!reflect.DeepEqual(ft.Shares, wt.Shares) || !reflect.DeepEqual(ft.Fragment.Runs, ExtantRuns(row)) {
			t.Errorf("fragment truth %+v; drawn want %v", ft, want)
		}
		if _, err := tr.FragmentTruth(w, "F2", row[:5], FormLeaf); err == nil {
			t.Error("FragmentTruth accepted a short row")
		}
		break
	}
	if _, _, err := tr.Split([]string{"nobody"}); err == nil {
		t.Error("split on an unknown siglum did not fail")
	}
	if _, err := Rebuild(c, []string{"A"}, [][]int32{{0}}); err == nil {
		t.Error("Rebuild accepted a short row")
	}
	bad := make([]int32, c.NumUnits())
	bad[0] = 99
	if _, err := Rebuild(c, []string{"A"}, [][]int32{bad}); err == nil {
		t.Error("Rebuild accepted a reading index out of range")
	}
}
