package simulate

import (
	"fmt"
	"math/rand/v2"
	"strings"
)

// WordLabels is a Labeller that gives units their section's name and a number (oil.01, oil.02,
// ...) and readings invented words: the archetype's word, other words put in its place, and
// spelling variants of these (c/k, i/y, u/v, a doubled consonant, a final e). Singular readings
// are mostly spelling slips. Each unit's words come from a generator of its own, seeded from the
// seed and the unit, so they do not depend on the order in which they are asked for.
//
// A WordLabels remembers the words it has made; it is not safe for concurrent use.
type WordLabels struct {
	seed     uint64
	sections []string
	units    map[int]*unitWords
}

type unitWords struct {
	rng    *rand.Rand
	labels []string
	seen   map[string]bool
	tries  int
}

// NewWordLabels returns word labels for a tradition whose sections are named sections.
func NewWordLabels(seed uint64, sections []string) *WordLabels {
	return &WordLabels{seed: seed, sections: sections, units: map[int]*unitWords{}}
}

// Unit returns the section name, a dot and the 1-based position in the section, two digits.
func (l *WordLabels) Unit(_, section, pos int) string {
	name := fmt.Sprint(section + 1)
	if section < len(l.sections) {
		name = l.sections[section]
	}
	return fmt.Sprintf("%s.%02d", name, pos+1)
}

// Reading returns reading r of unit u: r = 0 the archetype's word, then alternately other words
// and spelling variants of words already made, all distinct.
func (l *WordLabels) Reading(u, r int) string {
	uw := l.units[u]
	if uw == nil {
		uw = &unitWords{rng: rand.New(rand.NewPCG(l.seed^0x776f726473, uint64(u))), seen: map[string]bool{}}
		l.units[u] = uw
	}
	for len(uw.labels) <= r {
		uw.add(uw.candidate())
	}
	return uw.labels[r]
}

func (uw *unitWords) add(w string) {
	if w != "" && !uw.seen[w] {
		uw.seen[w] = true
		uw.labels = append(uw.labels, w)
	}
}

// candidate proposes the next label; after many proposals that were all taken it falls back to
// numbered forms of the first word, which never repeat.
func (uw *unitWords) candidate() string {
	uw.tries++
	n := len(uw.labels)
	switch {
	case n == 0:
		return inventWord(uw.rng)
	case uw.tries > 64*(n+1):
		return fmt.Sprintf("%s-%d", uw.labels[0], uw.tries)
	case n%3 == 1:
		return inventWord(uw.rng)
	default:
		return respell(uw.rng, uw.labels[intN(uw.rng, n)])
	}
}

var (
	onsets = []string{"b", "c", "d", "f", "g", "h", "l", "m", "n", "p", "r", "s", "t", "v", "w",
		"br", "cl", "cr", "dr", "fl", "gr", "pl", "sc", "st", "th", "tr", "wh"}
	vowels = []string{"a", "a", "e", "e", "i", "o", "u", "ae", "ea", "ou"}
	codas  = []string{"", "", "", "n", "r", "l", "s", "m", "nd", "rn", "st", "th"}
)

// inventWord makes a word of one to three syllables (mostly two), such as "vulaeth" or "grome".
func inventWord(rng *rand.Rand) string {
	var b strings.Builder
	syllables := 2
	switch k := intN(rng, 20); {
	case k < 3:
		syllables = 1
	case k >= 17:
		syllables = 3
	}
	for i := range syllables {
		b.WriteString(onsets[intN(rng, len(onsets))])
		b.WriteString(vowels[intN(rng, len(vowels))])
		if i == syllables-1 || chance(rng, 0.25) {
			b.WriteString(codas[intN(rng, len(codas))])
		}
	}
	if chance(rng, 0.3) {
		b.WriteString("e")
	}
	return b.String()
}

// respell applies one or two spelling changes to w.
func respell(rng *rand.Rand, w string) string {
	for range 1 + intN(rng, 2) {
		switch intN(rng, 6) {
		case 0:
			w = swapFirst(w, "c", "k")
		case 1:
			w = swapFirst(w, "i", "y")
		case 2:
			w = swapFirst(w, "u", "v")
		case 3:
			w = doubleConsonant(w)
		case 4:
			if strings.HasSuffix(w, "e") && len(w) > 3 {
				w = w[:len(w)-1]
			} else {
				w += "e"
			}
		case 5:
			w = swapFirst(w, "th", "d")
		}
	}
	return w
}

// swapFirst replaces the first a with b, or else the first b with a.
func swapFirst(w, a, b string) string {
	if strings.Contains(w, a) {
		return strings.Replace(w, a, b, 1)
	}
	return strings.Replace(w, b, a, 1)
}

// doubleConsonant doubles the first single consonant between two vowels, or else undoubles the
// first doubled letter.
func doubleConsonant(w string) string {
	isVowel := func(c byte) bool { return strings.IndexByte("aeiouy", c) >= 0 }
	for i := 1; i+1 < len(w); i++ {
		if !isVowel(w[i]) && isVowel(w[i-1]) && isVowel(w[i+1]) {
			return w[:i+1] + w[i:]
		}
	}
	for i := 1; i < len(w); i++ {
		if w[i] == w[i-1] {
			return w[:i] + w[i+1:]
		}
	}
	return w
}
