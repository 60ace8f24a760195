package store

import (
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
func ParseReadingsCSV(r io.Reader, opts ParseOptions) (ReadingBatch, error) {
	cr := csv.NewReader(r)
	cr.ReuseRecord = true
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if errors.Is(err, io.EOF) {
		return ReadingBatch{}, malformed("body", 0, "is empty: a CSV body starts with a header row naming its columns")
	}
	if err != nil {
		return ReadingBatch{}, csvMalformed(err)
	}
	cols := make([]readingColumn, len(header))
	seen := map[readingColumn]bool{}
	for i, h := range header {
		name := strings.TrimSpace(h)
		if i == 0 {
			name = strings.TrimPrefix(name, "\uFEFF")
		}
		c, ok := inputColumnIndex(name)
		if !ok {
			return ReadingBatch{}, unknownColumn(name, 0, 1)
		}
		if seen[c] {
			return ReadingBatch{}, malformed(name, 1, "appears twice in the header")
		}
		seen[c] = true
		cols[i] = c
	}
	if !seen[colAt] {
		return ReadingBatch{}, malformed("at", 1, "the header has no at column; every reading needs its time")
	}

	var (
		batch ReadingBatch
		slab  floatSlab
		names = interner{}
		row   int
	)
	for {
		rec, err := cr.Read()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return ReadingBatch{}, csvMalformed(err)
		}
		row++
		if opts.MaxRows > 0 && row > opts.MaxRows {
			return ReadingBatch{}, &TooManyRowsError{Limit: opts.MaxRows}
		}
		line, _ := cr.FieldPos(0)
		if len(rec) != len(cols) {
			batch.Refused = append(batch.Refused, FieldError{Field: "row", Row: row, Line: line,
				Reason: fmt.Sprintf("has %d fields; the header has %d", len(rec), len(cols))})
			continue
		}
		rd := Reading{Row: row, Line: line}
		bad := false
		for i, c := range cols {
			v := strings.TrimSpace(rec[i])
			if v == "" {
				continue
			}
			var why string
			switch c {
			case colSite:
				rd.Site = names.string(v)
			case colPosition:
				rd.Position = names.string(v)
			case colAt:
				t, ok := parseTime(v)
				if !ok {
					why = reasonNotTime
				}
				rd.At = t
			default:
				var f float64
				if f, why = parseNumber(v); why == "" {
					rd.setValue(c, slab.put(f))
				}
			}
			if why != "" {
				bad = true
				batch.Refused = append(batch.Refused, FieldError{Field: c.name(), Row: row, Line: line, Reason: why})
			}
		}
		if !bad {
			batch.Rows = append(batch.Rows, rd)
		}
	}
	return batch, nil
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
