package collation

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"unicode"
	"unicode/utf8"
)

// Column names of the long CSV form.
const (
	ColumnWitness = "witness"
	ColumnUnit    = "unit"
	ColumnReading = "reading"
	ColumnSection = "section"
)

// ParseError is an error in a collation file. Line is the 1-based line the faulty record starts
// on (0 if the error concerns no line, such as an empty file); Field is the column name of the
// faulty value, or "" if the error concerns a whole record or the file.
type ParseError struct {
	File  string
	Line  int
	Field string
	Err   error
}

func (e *ParseError) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, " line %d", e.Line)
	}
	if e.Field != "" {
		fmt.Fprintf(&b, ", field %s", e.Field)
	}
	b.WriteString(": ")
	b.WriteString(e.Err.Error())
	return b.String()
}

func (e *ParseError) Unwrap() error { return e.Err }

// ErrEmptyFile is the error (wrapped in a *ParseError) for a file with no header line.
var ErrEmptyFile = errors.New("the file is empty; expected a header line such as witness,unit,reading")

// ErrNoRows is the error (wrapped in a *ParseError) for a file with a header and no rows.
var ErrNoRows = errors.New("no rows after the header; expected one row per extant witness-unit pair")

// MaxCells is the largest witnesses x units table ReadCSV builds (100,000,000 cells, about 400
// MB, the TEI reader's default limit too). The long form names only the extant cells, so a short
// file can describe a huge table; a larger one is refused with a *ParseError at the row that
// would pass the limit.
const MaxCells = 100_000_000

// maxCells is MaxCells, lowered by tests.
var maxCells int64 = MaxCells

// ReadCSVFile reads a collation in the long CSV form (see ReadCSV) from the file at path. A file
// that cannot be opened gives the *os.PathError, wrapped; every other error is a *ParseError.
func ReadCSVFile(path string) (*Collation, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("reading collation: %w", err)
	}
	defer f.Close()
	return ReadCSV(f, path)
}

// ReadCSV reads a collation in the long CSV form from r. name is used in error messages (a file
// name). Every error is a *ParseError naming the file, the line and, where there is one, the
// field; its Err is a *ConflictError for a witness given two readings at a unit, a *SectionError
// for a unit given two sections, ErrEmptyFile or ErrNoRows.
//
// The long CSV form:
//
// The first line is a header naming the columns, in any order: witness, unit and reading are
// required, section is optional. Column names are matched without regard to case or surrounding
// white space. Any other column is rejected (with the list of the columns that are understood),
// so that nothing in a file is dropped without the user knowing.
//
// Every further line is one extant witness-unit pair: the witness (its siglum) has the reading
// at the unit. A pair with no line is a lacuna. Units are kept in the order they first appear,
// witnesses likewise, and the readings at a unit in the order they first appear at it.
//
// Each value has its surrounding white space removed. Witness, unit and reading must not be
// empty (an omission is a reading too and needs a label of its own); section may be empty, which
// means "not given". Values must be UTF-8 and must not hold control characters (tabs, line
// breaks) or a byte-order mark. A UTF-8 byte-order mark at the start of the file and CRLF line
// ends are accepted; blank lines are skipped.
//
// The same witness-unit pair given twice with the same reading is taken once; with different
// readings it is an error (a corrector is given a siglum of its own). A unit given two different
// non-empty sections is an error. A file with a header and no rows is an error, and so is one
// whose witnesses x units would pass MaxCells.
func ReadCSV(r io.Reader, name string) (*Collation, error) {
	if name == "" {
		name = "collation CSV"
	}
	br := bufio.NewReader(r)
	if bom, err := br.Peek(3); err == nil && bytes.Equal(bom, []byte("\xEF\xBB\xBF")) {
		if _, err := br.Discard(3); err != nil {
			return nil, &ParseError{File: name, Err: err}
		}
	}
	cr := csv.NewReader(br)
	cr.FieldsPerRecord = -1 // counted here, for a clearer message
	cr.ReuseRecord = true

	fail := func(line int, field string, err error) error {
		return &ParseError{File: name, Line: line, Field: field, Err: err}
	}
	readErr := func(err error) error {
		var pe *csv.ParseError
		if errors.As(err, &pe) {
			if pe.StartLine != pe.Line { // a quote left open: the record's first line says where
				return fail(pe.StartLine, "", fmt.Errorf("record running on to line %d, column %d: %w%s", pe.Line, pe.Column, pe.Err, csvHint(pe.Err)))
			}
			return fail(pe.Line, "", fmt.Errorf("column %d: %w%s", pe.Column, pe.Err, csvHint(pe.Err)))
		}
		return fail(0, "", err)
	}

	header, err := cr.Read()
	if err == io.EOF {
		return nil, fail(0, "", ErrEmptyFile)
	}
	if err != nil {
		return nil, readErr(err)
	}
	headerLine, _ := cr.FieldPos(0)
	cols, err := parseHeader(header)
	if err != nil {
		return nil, fail(headerLine, "", err)
	}

	var (
		b Builder
		// cellLine[w][u] is the line witness w's reading at unit u was first given on (0: not
		// yet); sectionLine[u] the line unit u's section was first given on.
		cellLine    [][]int32
		sectionLine []int
		rows        = 0
	)
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, readErr(err)
		}
		line, _ := cr.FieldPos(0)
		if len(rec) != len(cols.names) {
			return nil, fail(line, "", fmt.Errorf("%d fields, expected %d (%s) as in the header",
				len(rec), len(cols.names), strings.Join(cols.names, ",")))
		}
		var vals [4]string
		for i, raw := range rec {
			field := cols.names[i]
			v, err := cleanValue(raw)
			if err != nil {
				return nil, fail(line, field, err)
			}
			if v == "" && field != ColumnSection {
				return nil, fail(line, field, emptyFieldError(field))
			}
			vals[cols.role[i]] = v
		}
		siglum, unit, reading, section := vals[0], vals[1], vals[2], vals[3]

		u, err := b.AddUnit(unit, section)
		if err != nil {
			return nil, fail(line, ColumnSection, fmt.Errorf("%w (the first was given on line %d)", err, sectionLine[u]))
		}
		if u == len(sectionLine) {
			sectionLine = append(sectionLine, 0)
		}
		if sectionLine[u] == 0 && section != "" {
			sectionLine[u] = line
		}
		w := b.AddWitness(siglum)
		if w == len(cellLine) {
			cellLine = append(cellLine, nil)
		}
		if nw, nu := int64(len(cellLine)), int64(len(sectionLine)); nw*nu > maxCells {
			return nil, fail(line, "", fmt.Errorf("%d witnesses x %d units so far pass the limit of %d cells a collation may have", nw, nu, maxCells))
		}
		if err := b.AddCell(w, u, reading); err != nil {
			return nil, fail(line, ColumnReading, fmt.Errorf("%w (the first was given on line %d)", err, cellLine[w][u]))
		}
		for len(cellLine[w]) <= u {
			cellLine[w] = append(cellLine[w], 0)
		}
		if cellLine[w][u] == 0 {
			cellLine[w][u] = int32(line)
		}
		rows++
	}
	if rows == 0 {
		return nil, fail(headerLine, "", ErrNoRows)
	}
	return b.Build(), nil
}

// csvColumns maps the columns of a file to their roles.
type csvColumns struct {
	names []string // canonical column name of each field
	role  []int    // 0 witness, 1 unit, 2 reading, 3 section
}

var columnRoles = map[string]int{ColumnWitness: 0, ColumnUnit: 1, ColumnReading: 2, ColumnSection: 3}

func parseHeader(header []string) (csvColumns, error) {
	var c csvColumns
	seen := map[string]bool{}
	for i, raw := range header {
		if !utf8.ValidString(raw) {
			return c, fmt.Errorf("header field %d is not valid UTF-8; expected the column names witness, unit, reading and optionally section", i+1)
		}
		name := strings.ToLower(strings.TrimSpace(raw))
		role, ok := columnRoles[name]
		if !ok {
			return c, fmt.Errorf("unknown column %q in the header (field %d); expected the columns witness, unit, reading and optionally section, in any order (other columns are not read: remove them)", raw, i+1)
		}
		if seen[name] {
			return c, fmt.Errorf("column %q is named twice in the header", name)
		}
		seen[name] = true
		c.names = append(c.names, name)
		c.role = append(c.role, role)
	}
	var missing []string
	for _, name := range []string{ColumnWitness, ColumnUnit, ColumnReading} {
		if !seen[name] {
			missing = append(missing, name)
		}
	}
	if len(missing) > 0 {
		return c, fmt.Errorf("the header lacks the column(s) %s; expected a first line naming the columns witness, unit, reading and optionally section, in any order", strings.Join(missing, ", "))
	}
	return c, nil
}

func emptyFieldError(field string) error {
	switch field {
	case ColumnReading:
		return errors.New("empty reading; give every reading a label (an omission is a reading too, e.g. \"om\"), and leave the row out where the witness has a lacuna")
	case ColumnWitness:
		return errors.New("empty witness; expected the siglum of a witness")
	default:
		return errors.New("empty unit; expected the name of a variation unit")
	}
}

// cleanValue removes the white space around a value and checks what is left: it must be UTF-8
// and hold no control character and no byte-order mark.
func cleanValue(raw string) (string, error) {
	if !utf8.ValidString(raw) {
		i := 0
		for i < len(raw) {
			r, size := utf8.DecodeRuneInString(raw[i:])
			if r == utf8.RuneError && size == 1 {
				break
			}
			i += size
		}
		return "", fmt.Errorf("not valid UTF-8 (byte 0x%02X at byte %d of the field); save the file as UTF-8", raw[i], i+1)
	}
	v := strings.TrimSpace(raw)
	for _, r := range v {
		if unicode.IsControl(r) {
			return "", fmt.Errorf("holds the control character %U; a value is one line of text with no tabs or line breaks", r)
		}
		if r == '\uFEFF' {
			return "", errors.New("holds a byte-order mark (U+FEFF), which is allowed only at the very start of the file")
		}
	}
	return v, nil
}

// checkWritable reports whether ReadCSV would read v back unchanged as a value of the given
// column.
func checkWritable(v, field string) error {
	cleaned, err := cleanValue(v)
	if err != nil {
		return err
	}
	if cleaned != v {
		return errors.New("white space around the value, which the CSV form does not keep")
	}
	if v == "" && field != ColumnSection {
		return emptyFieldError(field)
	}
	return nil
}

func csvHint(err error) string {
	switch {
	case errors.Is(err, csv.ErrBareQuote):
		return "; a value holding a double quote must be put in double quotes, with the quote doubled inside (\"a \"\"b\"\"\")"
	case errors.Is(err, csv.ErrQuote):
		return "; a quoted value must end with a double quote before the next comma or line end"
	}
	return ""
}
