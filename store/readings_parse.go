package store

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// This file holds what the JSON and CSV reading parsers share: their
// answer, their errors, and fast routines for the values they read.

// ReadingBatch is a parsed request body: the rows that could be read and
// the rows that could not (each with its row, line, field and reason).
// Pass both to Ingest: Refused goes in IngestOptions.Refused.
type ReadingBatch struct {
	Rows    []Reading
	Refused []FieldError
}

// ParseOptions tunes the reading parsers.
type ParseOptions struct {
	// MaxRows refuses a body with more data rows (0: no limit).
	MaxRows int
}

// MalformedError means a body cannot be read as readings at all (bad JSON
// syntax, a CSV header naming an unknown column): no row was taken.
type MalformedError struct {
	Fields []FieldError
}

func (e *MalformedError) Error() string {
	parts := make([]string, len(e.Fields))
	for i, f := range e.Fields {
		parts[i] = f.String()
	}
	return "malformed readings: " + strings.Join(parts, "; ")
}

// malformed builds a MalformedError for one field.
func malformed(field string, line int, format string, args ...any) *MalformedError {
	return &MalformedError{Fields: []FieldError{{Field: field, Line: line, Reason: fmt.Sprintf(format, args...)}}}
}

// TooManyRowsError means a body holds more rows than ParseOptions.MaxRows.
type TooManyRowsError struct {
	Limit int
}

func (e *TooManyRowsError) Error() string {
	return fmt.Sprintf("more than %d readings in one request", e.Limit)
}

// Reasons the parsers give.
const (
	reasonNotNumber = "must be a decimal number"
	reasonNotTime   = "must be an RFC 3339 time such as 2026-01-31T08:00:00Z"
)

// readingColumn numbers the columns a posted reading may carry.
type readingColumn int

const (
	colSite readingColumn = iota
	colPosition
	colAt
	colValue0 // first measurement; the rest follow in table order
)

// inputColumnIndex maps an input column name to its number.
func inputColumnIndex(name string) (readingColumn, bool) {
	switch name {
	case "site":
		return colSite, true
	case "position":
		return colPosition, true
	case "at":
		return colAt, true
	}
	for i, n := range readingValueNames {
		if n == name {
			return colValue0 + readingColumn(i), true
		}
	}
	return 0, false
}

// unknownColumn is the error for a column or key that is not a reading
// column; an empty name is shown as "(empty)".
func unknownColumn(name string, row, line int) *MalformedError {
	name = strings.ToValidUTF8(name, "\uFFFD")
	if name == "" {
		name = "(empty)"
	}
	return &MalformedError{Fields: []FieldError{{Field: name, Row: row, Line: line,
		Reason: "is not a reading column; the columns are " + strings.Join(ReadingInputColumns(), ", ")}}}
}

// columnName names an input column.
func (c readingColumn) name() string {
	switch c {
	case colSite:
		return "site"
	case colPosition:
		return "position"
	case colAt:
		return "at"
	}
	return readingValueNames[c-colValue0]
}

// floatSlab hands out float64 slots from shared chunks, so a batch's
// measurements cost one allocation per few thousand values instead of one
// each. A chunk is never grown in place, so handed-out pointers stay valid.
type floatSlab struct{ buf []float64 }

func (s *floatSlab) put(v float64) *float64 {
	if len(s.buf) == cap(s.buf) {
		s.buf = make([]float64, 0, 4096)
	}
	s.buf = append(s.buf, v)
	return &s.buf[len(s.buf)-1]
}

// interner keeps one copy of each site name and tag of a batch.
type interner map[string]string

// setValue stores measurement column c of r.
func (r *Reading) setValue(c readingColumn, v *float64) {
	*r.valueSlots()[c-colValue0] = v
}

// parseNumber reads a measurement: a decimal number, optionally signed,
// with an optional fraction and exponent. It returns the reason when the
// text is not one or is not finite.
func parseNumber(b string) (float64, string) {
	if v, ok := parseDecimalFast(b); ok {
		return v, ""
	}
	if !isDecimal(b) {
		if v, err := strconv.ParseFloat(b, 64); err == nil && (math.IsNaN(v) || math.IsInf(v, 0)) {
			return 0, reasonNotFinite
		}
		return 0, reasonNotNumber
	}
	v, err := strconv.ParseFloat(b, 64)
	if err != nil || math.IsInf(v, 0) {
		if math.IsInf(v, 0) {
			return 0, reasonNotFinite
		}
		return 0, reasonNotNumber
	}
	return v, ""
}

// exactPow10 holds the powers of ten a float64 represents exactly.
var exactPow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}

// parseDecimalFast reads the plain decimals readings are made of
// ("-12.375", "677", "4700.5") without strconv's general machinery. When
// the digits fit in 2^53 and at most 22 of them follow the point, both the
// integer and the power of ten are exact in a float64 and one division
// rounds correctly (Clinger's fast path, which strconv.ParseFloat takes for
// the same inputs), so the result equals strconv.ParseFloat's. Anything
// else (an exponent, more digits, no digit) reports ok false.
func parseDecimalFast(b string) (float64, bool) {
	i, neg := 0, false
	if i < len(b) && (b[i] == '-' || b[i] == '+') {
		neg = b[i] == '-'
		i++
	}
	var mant uint64
	digits, frac := 0, -1
	for ; i < len(b); i++ {
		c := b[i]
		switch {
		case c >= '0' && c <= '9':
			if mant > (1<<53)/10 {
				return 0, false
			}
			mant = mant*10 + uint64(c-'0')
			digits++
			if frac >= 0 {
				frac++
			}
		case c == '.' && frac < 0:
			frac = 0
		default:
			return 0, false
		}
	}
	if digits == 0 || mant > 1<<53 {
		return 0, false
	}
	v := float64(mant)
	if frac > 0 {
		if frac >= len(exactPow10) {
			return 0, false
		}
		v /= exactPow10[frac]
	}
	if neg {
		v = -v
	}
	return v, true
}

// isDecimal reports whether b is [+-]? digits [. digits] [(e|E) [+-]? digits]
// with at least one digit before the exponent (".5" and "5." allowed).
func isDecimal[T string | []byte](b T) bool {
	i := 0
	if i < len(b) && (b[i] == '+' || b[i] == '-') {
		i++
	}
	digits := 0
	for i < len(b) && b[i] >= '0' && b[i] <= '9' {
		i++
		digits++
	}
	if i < len(b) && b[i] == '.' {
		i++
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
			digits++
		}
	}
	if digits == 0 {
		return false
	}
	if i < len(b) && (b[i] == 'e' || b[i] == 'E') {
		i++
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			i++
		}
		exp := 0
		for i < len(b) && b[i] >= '0' && b[i] <= '9' {
			i++
			exp++
		}
		if exp == 0 {
			return false
		}
	}
	return i == len(b)
}

// parseTime reads an RFC 3339 time into UTC (time.Parse has a fast path
// for this layout).
func parseTime(v string) (time.Time, bool) {
	t, err := time.Parse(time.RFC3339Nano, v)
	if err != nil {
		return time.Time{}, false
	}
	return t.UTC(), true
}
