package store

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"
)

// ParseReadingsCSV reads readings from CSV with a header row. The header
// names columns from ReadingInputColumns in any order (at is required); an
// unknown or repeated column makes the whole body a *MalformedError, as does
// CSV that cannot be read (a stray quote). An empty field is a missing
// value. A row whose field cannot be read (not a number, not an RFC 3339
// time, the wrong number of fields) is listed in Refused with its row, line
// and reason, and the other rows are returned. More than opts.MaxRows data
// rows is a *TooManyRowsError.
//
// A body without a double quote, which is what gateways and historians
// write, is split by hand; one with quotes goes through encoding/csv. Both
// give the same rows (FuzzParseReadingsCSV holds them to it); the hand
// split reads readings about twice as fast (BenchmarkParseReadingsCSV).
func ParseReadingsCSV(body []byte, opts ParseOptions) (ReadingBatch, error) {
	if bytes.IndexByte(body, '"') < 0 {
		return parseCSVPlain(body, opts)
	}
	return parseCSVQuoted(body, opts)
}

// text is what CSV fields come as: strings from encoding/csv, byte slices
// from the hand split.
type text interface{ ~string | ~[]byte }

// csvRows collects the rows of a CSV body.
type csvRows struct {
	cols  []readingColumn
	max   int
	row   int
	batch ReadingBatch
	slab  floatSlab
	names interner
}

// csvHeader reads the header row into column numbers.
func csvHeader[T text](fields []T) ([]readingColumn, error) {
	cols := make([]readingColumn, len(fields))
	seen := map[readingColumn]bool{}
	for i, h := range fields {
		name := strings.TrimSpace(string(h))
		if i == 0 {
			name = strings.TrimPrefix(name, "\uFEFF")
		}
		c, ok := inputColumnIndex(name)
		if !ok {
			return nil, unknownColumn(name, 0, 1)
		}
		if seen[c] {
			return nil, malformed(name, 1, "appears twice in the header")
		}
		seen[c] = true
		cols[i] = c
	}
	if !seen[colAt] {
		return nil, malformed("at", 1, "the header has no at column; every reading needs its time")
	}
	return cols, nil
}

// addRecord reads one data record that starts on line.
func addRecord[T text](c *csvRows, rec []T, line int) error {
	c.row++
	if c.max > 0 && c.row > c.max {
		return &TooManyRowsError{Limit: c.max}
	}
	if len(rec) != len(c.cols) {
		c.batch.Refused = append(c.batch.Refused, FieldError{Field: "row", Row: c.row, Line: line,
			Reason: fmt.Sprintf("has %d fields; the header has %d", len(rec), len(c.cols))})
		return nil
	}
	rd := Reading{Row: c.row, Line: line}
	bad := false
	for i, col := range c.cols {
		v := trimSpace(rec[i])
		if len(v) == 0 {
			continue
		}
		var why string
		switch col {
		case colSite:
			rd.Site = intern(c.names, v)
		case colPosition:
			rd.Position = intern(c.names, v)
		case colAt:
			t, ok := parseTime(string(v))
			if !ok {
				why = reasonNotTime
			}
			rd.At = t
		default:
			var f float64
			if f, why = parseNumber(string(v)); why == "" {
				rd.setValue(col, c.slab.put(f))
			}
		}
		if why != "" {
			bad = true
			c.batch.Refused = append(c.batch.Refused, FieldError{Field: col.name(), Row: c.row, Line: line, Reason: why})
		}
	}
	if !bad {
		c.batch.Rows = append(c.batch.Rows, rd)
	}
	return nil
}

// trimSpace trims ASCII white space, as strings.TrimSpace does for it.
func trimSpace[T text](v T) T {
	i, j := 0, len(v)
	for i < j && isSpace(v[i]) {
		i++
	}
	for j > i && isSpace(v[j-1]) {
		j--
	}
	return v[i:j]
}

func isSpace(c byte) bool {
	return c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\v' || c == '\f'
}

// intern returns the interned copy of a site name or tag.
func intern[T text](in interner, v T) string {
	if s, ok := in[string(v)]; ok {
		return s
	}
	s := strings.Clone(string(v))
	in[s] = s
	return s
}

// parseCSVPlain splits a body without quotes by hand, the way
// encoding/csv would: records end at \n (a \r before it or before the end
// of the body is dropped), empty lines are skipped, fields end at commas.
func parseCSVPlain(body []byte, opts ParseOptions) (ReadingBatch, error) {
	var (
		c      = csvRows{max: opts.MaxRows, names: interner{}}
		fields [][]byte
		line   int
		pos    int
	)
	next := func() ([]byte, bool) {
		for pos < len(body) {
			line++
			l := body[pos:]
			if end := bytes.IndexByte(l, '\n'); end >= 0 {
				l, pos = l[:end], pos+end+1
			} else {
				pos = len(body)
			}
			if n := len(l); n > 0 && l[n-1] == '\r' {
				l = l[:n-1]
			}
			if len(l) > 0 {
				return l, true
			}
		}
		return nil, false
	}
	split := func(l []byte) [][]byte {
		fields = fields[:0]
		for {
			i := bytes.IndexByte(l, ',')
			if i < 0 {
				fields = append(fields, l)
				return fields
			}
			fields, l = append(fields, l[:i]), l[i+1:]
		}
	}
	head, ok := next()
	if !ok {
		return ReadingBatch{}, malformed("body", 0, "is empty: a CSV body starts with a header row naming its columns")
	}
	cols, err := csvHeader(split(head))
	if err != nil {
		return ReadingBatch{}, err
	}
	c.cols = cols
	estimate := bytes.Count(body[pos:], []byte{'\n'}) + 1
	if opts.MaxRows > 0 {
		estimate = min(estimate, opts.MaxRows)
	}
	c.batch.Rows = make([]Reading, 0, estimate)
	for {
		l, ok := next()
		if !ok {
			break
		}
		if err := addRecord(&c, split(l), line); err != nil {
			return ReadingBatch{}, err
		}
	}
	return c.batch, nil
}

// parseCSVQuoted reads a body that holds quotes with encoding/csv.
func parseCSVQuoted(body []byte, opts ParseOptions) (ReadingBatch, error) {
	cr := csv.NewReader(bytes.NewReader(body))
	cr.ReuseRecord = true
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return ReadingBatch{}, malformed("body", 0, "is empty: a CSV body starts with a header row naming its columns")
	}
	if err != nil {
		return ReadingBatch{}, csvMalformed(err)
	}
	c := csvRows{max: opts.MaxRows, names: interner{}}
	if c.cols, err = csvHeader(header); err != nil {
		return ReadingBatch{}, err
	}
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return ReadingBatch{}, csvMalformed(err)
		}
		line, _ := cr.FieldPos(0)
		if err := addRecord(&c, rec, line); err != nil {
			return ReadingBatch{}, err
		}
	}
	return c.batch, nil
}

// csvMalformed describes a CSV syntax error.
func csvMalformed(err error) error {
	var pe *csv.ParseError
	if errors.As(err, &pe) {
		return malformed("body", pe.Line, "is not valid CSV at line %d, column %d: %v", pe.Line, pe.Column, pe.Err)
	}
	return malformed("body", 0, "cannot be read: %v", err)
}

// WriteReadingsCSV writes readings as CSV with a header row of cols, each
// a name from ReadingOutputColumns or ReadingInputColumns. Missing values
// are empty fields; numbers are written in the shortest form that reads
// back to the same value; times are RFC 3339 UTC.
func WriteReadingsCSV(w io.Writer, rows []Reading, cols []string) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(cols); err != nil {
		return fmt.Errorf("write CSV header: %w", err)
	}
	rec := make([]string, len(cols))
	buf := make([]byte, 0, 64)
	for i := range rows {
		r := &rows[i]
		vals := r.values()
		for j, c := range cols {
			switch c {
			case "drive_id":
				rec[j] = strconv.FormatInt(r.DriveID, 10)
			case "position_id":
				rec[j] = strconv.FormatInt(r.PositionID, 10)
			case "site":
				rec[j] = r.Site
			case "position":
				rec[j] = r.Position
			case "at":
				rec[j] = r.At.UTC().Format(time.RFC3339Nano)
			default:
				col, ok := inputColumnIndex(c)
				if !ok || col < colValue0 {
					return fmt.Errorf("write CSV: %q is not a reading column", c)
				}
				v := vals[col-colValue0]
				if v == nil {
					rec[j] = ""
					continue
				}
				buf = strconv.AppendFloat(buf[:0], *v, 'g', -1, 64)
				rec[j] = string(buf)
			}
		}
		if err := cw.Write(rec); err != nil {
			return fmt.Errorf("write CSV row %d: %w", i+1, err)
		}
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return fmt.Errorf("write CSV: %w", err)
	}
	return nil
}
