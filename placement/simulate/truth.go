package simulate

import (
	"encoding/json"
	"fmt"
	"io"
)

// Kind says how a witness was made.
type Kind string

// The kinds of witness.
const (
	// KindPure is a copy of its group's exemplar alone.
	KindPure Kind = "pure"
	// KindMixed took each unit from a secondary group's exemplar with its mixture share.
	KindMixed Kind = "mixed"
	// KindBlockMixed changed exemplar at a section boundary.
	KindBlockMixed Kind = "block-mixed"
	// KindFragmentary survives at a few units only.
	KindFragmentary Kind = "fragmentary"
)

// The forms of a fragment.
const (
	// FormLeaf is one contiguous stretch of units.
	FormLeaf = "leaf"
	// FormLeaves is several contiguous stretches (leaves that are not consecutive).
	FormLeaves = "leaves"
	// FormScattered is units scattered over the text.
	FormScattered = "scattered"
)

// Run is a stretch of consecutive units [Start, End), by unit index in the collation.
type Run struct {
	Start int `json:"start"`
	End   int `json:"end"`
}

// Len returns the number of units in the run.
func (r Run) Len() int { return r.End - r.Start }

// Switch is where a block-mixed witness changed exemplar.
type Switch struct {
	// Section is the label of the first section copied from the new exemplar; SectionIndex its
	// index among the sections; Unit the index of its first unit.
	Section      string `json:"section"`
	SectionIndex int    `json:"section_index"`
	Unit         int    `json:"unit"`
	// From is the group of the exemplar of the sections before the switch, To that of the
	// sections from it on.
	From int `json:"from"`
	To   int `json:"to"`
}

// Fragment tells what survives of a fragmentary witness.
type Fragment struct {
	// Form is FormLeaf, FormLeaves or FormScattered.
	Form string `json:"form"`
	// Runs are the surviving stretches of a leaf or leaves (not given for scattered units).
	Runs []Run `json:"runs,omitempty"`
}

// WitnessTruth is what really happened to one witness.
type WitnessTruth struct {
	Siglum string `json:"siglum"`
	// Group is the index of the witness's own (primary) group: the group it was copied from; for
	// a mixed witness the group of the larger share; for a block-mixed witness the group it
	// copied more units from (on a tie, the group of its opening sections).
	Group int  `json:"group"`
	Kind  Kind `json:"kind"`
	// Shares[g] is the true share of group g in the witness's descent: 1 for its own group if it
	// is pure or fragmentary; 1-s and s for a mixed witness with mixture share s (the probability
	// with which each unit was taken from the second group); the shares of units before and
	// from the switch for a block-mixed witness. They sum to 1.
	Shares []float64 `json:"shares"`
	// Drawn[g] is the number of the witness's extant units that were copied from group g's
	// exemplar (before the copyist's own changes): the realised mixture.
	Drawn []int `json:"drawn"`
	// Extant is the number of units at which the witness has a reading.
	Extant int `json:"extant"`
	// Switch is set for a block-mixed witness.
	Switch *Switch `json:"switch,omitempty"`
	// Fragment is set for a fragmentary witness.
	Fragment *Fragment `json:"fragment,omitempty"`
	// Lacunae are the witness's lacunae, merged and in text order (non-fragmentary witnesses).
	Lacunae []Run `json:"lacunae,omitempty"`
}

// GroupTruth describes one group.
type GroupTruth struct {
	Name string `json:"name"`
	// Family is the index of the family (the hyparchetype) the group descends from; groups of
	// one family are sub-groups of it.
	Family int `json:"family"`
	// Members is the number of witnesses whose own group it is.
	Members int `json:"members"`
}

// Truth is the known history of a simulated tradition.
type Truth struct {
	Seed uint64 `json:"seed"`
	// Units is the number of variation units; Sections their section labels in text order.
	Units    int          `json:"units"`
	Sections []string     `json:"sections"`
	Groups   []GroupTruth `json:"groups"`
	// Witnesses are in collation order.
	Witnesses []WitnessTruth `json:"witnesses"`
	// Fragments, if any, are witnesses kept apart from the collation (fragments to place), in
	// the order of their own collation.
	Fragments []WitnessTruth `json:"fragments,omitempty"`
}

// Witness returns the truth of the witness or fragment with the given siglum.
func (t *Truth) Witness(siglum string) (WitnessTruth, bool) {
	for _, set := range [][]WitnessTruth{t.Witnesses, t.Fragments} {
		for _, w := range set {
			if w.Siglum == siglum {
				return w, true
			}
		}
	}
	return WitnessTruth{}, false
}

// countMembers sets each group's Members from Witnesses.
func (t *Truth) countMembers() {
	for g := range t.Groups {
		t.Groups[g].Members = 0
	}
	for _, w := range t.Witnesses {
		if w.Group >= 0 && w.Group < len(t.Groups) {
			t.Groups[w.Group].Members++
		}
	}
}

// WriteTruth writes the truth as indented JSON.
func (t *Tradition) WriteTruth(w io.Writer) error { return t.Truth.Write(w) }

// Write writes the truth as indented JSON.
func (t *Truth) Write(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(t); err != nil {
		return fmt.Errorf("writing simulation truth: %w", err)
	}
	return nil
}

// ReadTruth reads truth written by WriteTruth and checks that it hangs together (group indexes
// in range, one share per group).
func ReadTruth(r io.Reader) (*Truth, error) {
	dec := json.NewDecoder(r)
	dec.DisallowUnknownFields()
	var t Truth
	if err := dec.Decode(&t); err != nil {
		return nil, fmt.Errorf("reading simulation truth: %w", err)
	}
	ng := len(t.Groups)
	for _, set := range [][]WitnessTruth{t.Witnesses, t.Fragments} {
		for _, w := range set {
			if w.Group < 0 || w.Group >= ng {
				return nil, fmt.Errorf("reading simulation truth: witness %q has group %d; there are %d groups", w.Siglum, w.Group, ng)
			}
			if len(w.Shares) != ng {
				return nil, fmt.Errorf("reading simulation truth: witness %q has %d shares for %d groups", w.Siglum, len(w.Shares), ng)
			}
		}
	}
	return &t, nil
}
