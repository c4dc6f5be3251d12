package collation

import "fmt"

// Agreement compares two collation rows (reading indexes by unit, Lacuna where a witness has
// none, as Collation.Row gives them) the way the trade measures how alike two witnesses are
// before any genealogical reasoning (common practice):
//
//	agreement = agree / compared
//
// where compared is the number of units at which both witnesses are extant and agree the number
// of those at which they have the same reading. A unit where either has a lacuna is not counted
// at all. The share is left to the caller, since it is undefined when compared is 0 and a share
// means little without the number of units behind it. Every reading counts as given, singular
// readings included.
//
// a and b must be rows of the same collation (of equal length); Agreement panics otherwise, as
// that is a programming error, not a fault in the data.
func Agreement(a, b []int32) (agree, compared int) {
	if len(a) != len(b) {
		panic(fmt.Sprintf("collation.Agreement: rows of %d and %d units; rows of one collation have the same length", len(a), len(b)))
	}
	for u, ra := range a {
		rb := b[u]
		if ra == Lacuna || rb == Lacuna {
			continue
		}
		compared++
		if ra == rb {
			agree++
		}
	}
	return agree, compared
}

// Agreement returns the agreement between witnesses v and w of c (by index): the units at which
// both are extant and have the same reading, and the units at which both are extant. See the
// package function Agreement.
func (c *Collation) Agreement(v, w int) (agree, compared int) {
	return Agreement(c.Row(v), c.Row(w))
}
