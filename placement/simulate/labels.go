package simulate

import "fmt"

// Labeller names the units and readings of a simulated tradition.
type Labeller interface {
	// Unit names unit u, the pos-th unit (from 0) of the section with index section. Names must
	// be distinct and non-empty.
	Unit(u, section, pos int) string
	// Reading names reading r of unit u. Readings 0 .. Config.Readings-1 are the unit's pool
	// (0 is the archetype's); higher r are singular readings, made by one copyist each. Names
	// must be distinct within a unit and non-empty.
	Reading(u, r int) string
}

// PlainLabels is the default Labeller: units u001, u002, ... (zero-padded to width), pool
// readings a, b, c, ... and singular readings x1, x2, ...
type PlainLabels struct {
	// Width is the number of digits of unit numbers (3 if zero).
	Width int
	// Pool is the number of pool readings per unit (Config.Readings).
	Pool int
}

// Unit returns "u" and the 1-based unit number.
func (p PlainLabels) Unit(u, _, _ int) string {
	w := p.Width
	if w <= 0 {
		w = 3
	}
	return fmt.Sprintf("u%0*d", w, u+1)
}

// Reading returns a letter for a pool reading (a-z, then r27, r28, ...) and x1, x2, ... for
// singular readings.
func (p PlainLabels) Reading(_, r int) string {
	if r >= p.Pool {
		return fmt.Sprintf("x%d", r-p.Pool+1)
	}
	if r < 26 {
		return string(rune('a' + r))
	}
	return fmt.Sprintf("r%d", r+1)
}
