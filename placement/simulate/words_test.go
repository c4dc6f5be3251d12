package simulate

import (
	"strings"
	"testing"
)

func TestWordLabelsAreDistinctAndOrderFree(t *testing.T) {
	a := NewWordLabels(9, []string{"oil", "wick"})
	b := NewWordLabels(9, []string{"oil", "wick"})
	if got := a.Unit(41, 1, 0); got != "wick.01" {
		t.Errorf("Unit = %q, want wick.01", got)
	}
	const n = 60 // far more readings than a unit ever gets
	for u := range 30 {
		seen := map[string]bool{}
		for r := range n {
			l := a.Reading(u, r)
			if l == "" || seen[l] || strings.TrimSpace(l) != l {
				t.Fatalf("unit %d reading %d: %q empty, repeated or padded", u, r, l)
			}
			seen[l] = true
		}
	}
	// Asked in another order, the words are the same.
	for u := 29; u >= 0; u-- {
		for r := n - 1; r >= 0; r -= 7 {
			if a.Reading(u, r) != b.Reading(u, r) {
				t.Fatalf("unit %d reading %d depends on the order of asking", u, r)
			}
		}
	}
	if NewWordLabels(10, nil).Reading(0, 0) == a.Reading(0, 0) && NewWordLabels(10, nil).Reading(1, 0) == a.Reading(1, 0) {
		t.Error("another seed gave the same words")
	}
}

func TestRespellHelpers(t *testing.T) {
	for _, tc := range []struct{ got, want string }{
		{swapFirst("cacus", "c", "k"), "kacus"},
		{swapFirst("kalk", "c", "k"), "calk"},
		{doubleConsonant("talen"), "tallen"},
		{doubleConsonant("tallnn"), "talnn"},
		{doubleConsonant("strn"), "strn"},
	} {
		if tc.got != tc.want {
			t.Errorf("got %q, want %q", tc.got, tc.want)
		}
	}
}
