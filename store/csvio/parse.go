package csvio

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"slices"
	"strings"
	"unicode/utf8"

	"kelvard/store"
)

// table is a parsed register CSV file.
type table struct {
	spec *spec
	// header lists the columns the file gives, in file order.
	header []string
	rows   []*row
}

// has reports whether the file's header names the column.
func (t *table) has(col string) bool { return slices.Contains(t.header, col) }

// row is one data row: where it stands in the file, its parsed non-empty
// cells and the problems found in them.
type row struct {
	// line is the 1-based line where the record starts (the header is
	// line 1); n is the 1-based data row.
	line, n int
	vals    map[string]any
	errs    []store.FieldError
}

// has reports whether the row gives the column a value.
func (r *row) has(col string) bool {
	_, ok := r.vals[col]
	return ok
}

// str returns a text or word cell ("" when not given).
func (r *row) str(col string) string {
	s, _ := r.vals[col].(string)
	return s
}

// bad records a problem with one of the row's cells.
func (r *row) bad(col, format string, args ...any) {
	r.errs = append(r.errs, store.FieldError{Field: col, Row: r.n, Line: r.line, Reason: fmt.Sprintf(format, args...)})
}

const utf8BOM = "\uFEFF"

// parse reads a register CSV file of the spec's kind. Problems with the
// header, or CSV that cannot be read at all (a stray quote), answer a
// *store.ValidationError: nothing of the file can be trusted then. Problems
// with single cells stay with their rows. Reader errors are wrapped.
func parse(sp *spec, r io.Reader) (*table, error) {
	br := bufio.NewReader(r)
	if b, err := br.Peek(len(utf8BOM)); err == nil && string(b) == utf8BOM {
		br.Discard(len(utf8BOM))
	}
	cr := csv.NewReader(br)
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return nil, &store.ValidationError{Fields: []store.FieldError{{Field: "header", Line: 1,
			Reason: "the file is empty; its first line must name the columns"}}}
	}
	if err != nil {
		return nil, readError(err, 1)
	}
	headerLine, _ := cr.FieldPos(0)
	t := &table{spec: sp}
	if err := t.readHeader(header, headerLine); err != nil {
		return nil, err
	}
	line := headerLine
	for n := 1; ; n++ {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return nil, readError(err, line)
		}
		line, _ = cr.FieldPos(0)
		if blank(rec) {
			n--
			continue
		}
		t.rows = append(t.rows, t.readRow(rec, line, n))
	}
	return t, nil
}

// readError turns a CSV syntax error into a validation error naming its
// line, and wraps any other reader error.
func readError(err error, line int) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return &store.ValidationError{Fields: []store.FieldError{{Field: "csv", Line: pe.Line,
			Reason: fmt.Sprintf("%v at column %d; nothing after it can be read", pe.Err, pe.Column)}}}
	}
	return fmt.Errorf("read CSV after line %d: %w", line, err)
}

// readHeader checks the column names: every one known, none twice, the
// natural key present.
func (t *table) readHeader(rec []string, line int) error {
	sp := t.spec
	var fe []store.FieldError
	bad := func(field, format string, args ...any) {
		fe = append(fe, store.FieldError{Field: field, Line: line, Reason: fmt.Sprintf(format, args...)})
	}
	var unknown []string
	for i, name := range rec {
		name = strings.TrimSpace(name)
		switch _, known := sp.column(name); {
		case name == "":
			bad(fmt.Sprintf("column %d", i+1), "has no name")
		case !utf8.ValidString(name):
			bad(fmt.Sprintf("column %d", i+1), "is not UTF-8 text")
		case !known:
			unknown = append(unknown, name)
			bad(name, "is not a column of %s", sp.kind)
		case slices.Contains(t.header, name):
			bad(name, "is named twice")
		}
		t.header = append(t.header, name)
	}
	if len(unknown) > 0 {
		names, _ := Columns(sp.kind)
		fe = append(fe, store.FieldError{Field: "header", Line: line,
			Reason: fmt.Sprintf("unknown columns %s; %s files take %s", strings.Join(unknown, ", "), sp.kind, strings.Join(names, ", "))})
	}
	for _, k := range sp.key {
		if !slices.Contains(t.header, k) {
			bad(k, "is missing: %s files need the columns %s", sp.kind, strings.Join(sp.key, ", "))
		}
	}
	if sp.kind == KindEvents && !slices.Contains(t.header, "serial") && !slices.Contains(t.header, "position") {
		bad("serial", "is missing: an events file names the drive by serial, or by site and position")
	}
	if len(fe) > 0 {
		return &store.ValidationError{Fields: fe}
	}
	return nil
}

// readRow parses the cells of one record.
func (t *table) readRow(rec []string, line, n int) *row {
	r := &row{line: line, n: n, vals: make(map[string]any, len(rec))}
	if len(rec) != len(t.header) {
		r.bad("row", "has %d cells; the header names %d columns", len(rec), len(t.header))
		return r
	}
	for i, cell := range rec {
		c, ok := t.spec.column(t.header[i])
		if !ok {
			continue
		}
		if c.typ != cellText {
			cell = strings.TrimSpace(cell)
		}
		if cell == "" {
			continue
		}
		if !store.GoodText(cell) {
			r.bad(c.name, "%s", store.BadTextReason)
			continue
		}
		v, err := parseCell(c.typ, cell)
		if err != nil {
			r.bad(c.name, "%v", err)
			continue
		}
		r.vals[c.name] = v
	}
	t.requireKey(r)
	return r
}

// requireKey checks that the row gives its natural key.
func (t *table) requireKey(r *row) {
	given := func(col string) bool {
		return r.has(col) || slices.ContainsFunc(r.errs, func(f store.FieldError) bool { return f.Field == col })
	}
	for _, k := range t.spec.key {
		if !given(k) {
			r.bad(k, "is required")
		}
	}
	if t.spec.kind == KindEvents {
		switch {
		case !given("serial") && !given("position"):
			r.bad("serial", "is required, unless site and position name where the drive stood")
		case given("position") && !given("site"):
			r.bad("site", "is required with position")
		}
	}
}

// blank reports whether every cell of a record is empty or spaces, as
// spreadsheets write trailing rows.
func blank(rec []string) bool {
	for _, c := range rec {
		if strings.TrimSpace(c) != "" {
			return false
		}
	}
	return true
}
