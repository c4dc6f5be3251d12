package collation

import (
	"fmt"
	"strings"
	"testing"
)

// fromTable builds a collation from a table: one string per witness, "siglum: r1 r2 ...", one
// reading label per unit (units named u1, u2, ...), "-" for a lacuna. Cells are added unit by
// unit, witnesses in table order, so reading indexes follow first appearance down each column.
func fromTable(t *testing.T, rows ...string) *Collation {
	t.Helper()
	var b Builder
	var sigla []string
	var cells [][]string
	for _, row := range rows {
		siglum, rest, ok := strings.Cut(row, ":")
		if !ok {
			t.Fatalf("bad table row %q", row)
		}
		sigla = append(sigla, strings.TrimSpace(siglum))
		cells = append(cells, strings.Fields(rest))
		b.AddWitness(strings.TrimSpace(siglum))
	}
	for u := range cells[0] {
		id := fmt.Sprintf("u%d", u+1)
		if _, err := b.AddUnit(id, ""); err != nil {
			t.Fatal(err)
		}
		for w := range sigla {
			if len(cells[w]) != len(cells[0]) {
				t.Fatalf("table row %d has %d cells, row 0 has %d", w, len(cells[w]), len(cells[0]))
			}
			if r := cells[w][u]; r != "-" {
				if err := b.Add(sigla[w], id, r, ""); err != nil {
					t.Fatal(err)
				}
			}
		}
	}
	return b.Build()
}

// TestAgreementHandWorked checks Agreement on a small example worked by hand. The measure is the
// trade's (common practice, trade notes): units where both have the same reading / units where
// both are extant; a lacuna in either leaves the unit out.
func TestAgreementHandWorked(t *testing.T) {
	c := fromTable(t,
		//     u1 u2 u3 u4 u5 u6 u7
		"Ald: a  a  b  -  a  b  a",
		"Bir: a  b  b  a  -  b  b",
		"Ced: -  a  b  a  a  -  a",
		"Hol: -  -  -  -  -  -  -", // declared, never extant
	)
	tests := []struct {
		v, w            string
		agree, compared int
		why             string
	}{
		// Both extant at u1 u2 u3 u6 u7 (Ald lacks u4, Bir lacks u5); same reading at u1 u3 u6.
		{"Ald", "Bir", 3, 5, "u1 a=a, u2 a/b, u3 b=b, u6 b=b, u7 a/b"},
		// Both extant at u2 u3 u5 u7; same reading at all four.
		{"Ald", "Ced", 4, 4, "u2 a=a, u3 b=b, u5 a=a, u7 a=a"},
		// Both extant at u2 u3 u4 u7; same reading at u3 u4.
		{"Bir", "Ced", 2, 4, "u2 b/a, u3 b=b, u4 a=a, u7 b/a"},
		// A witness agrees with itself wherever it is extant (6 of 7 units for Ald).
		{"Ald", "Ald", 6, 6, "all extant units"},
		// A witness never extant is compared at no unit.
		{"Ald", "Hol", 0, 0, "no common extant unit"},
	}
	for _, tc := range tests {
		v, _ := c.WitnessIndex(tc.v)
		w, _ := c.WitnessIndex(tc.w)
		for _, pair := range [][2]int{{v, w}, {w, v}} { // symmetric
			agree, compared := c.Agreement(pair[0], pair[1])
			if agree != tc.agree || compared != tc.compared {
				t.Errorf("Agreement(%s, %s) = %d/%d, want %d/%d (%s)", c.Witness(pair[0]), c.Witness(pair[1]), agree, compared, tc.agree, tc.compared, tc.why)
			}
		}
	}
}

func TestAgreementRows(t *testing.T) {
	a := []int32{0, 1, Lacuna, 2, 0}
	b := []int32{0, 0, 1, 2, Lacuna}
	// Both extant at units 0, 1, 3; same at 0 and 3.
	if agree, compared := Agreement(a, b); agree != 2 || compared != 3 {
		t.Errorf("Agreement = %d/%d, want 2/3", agree, compared)
	}
	if agree, compared := Agreement(nil, nil); agree != 0 || compared != 0 {
		t.Errorf("Agreement(nil, nil) = %d/%d, want 0/0", agree, compared)
	}
}

func TestAgreementUnequalRowsPanics(t *testing.T) {
	defer func() {
		r := recover()
		if r == nil || !strings.Contains(r.(string), "rows of 2 and 3 units") {
			t.Errorf("recovered %v, want a panic naming the lengths", r)
		}
	}()
	Agreement([]int32{0, 1}, []int32{0, 1, 2})
}
