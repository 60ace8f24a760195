package store

import (
	"bytes"
	"unicode/utf16"
	"unicode/utf8"
)

// ParseReadingsJSON reads readings from a JSON array of objects whose keys
// are names from ReadingInputColumns; null or an absent key is a missing
// value. Bad JSON, a body that is not an array, or a key that is not a
// reading column makes the whole body a *MalformedError. A row whose value
// has the wrong type, an unreadable time, a non-finite number or a key
// given twice is listed in Refused with its row, the line its object starts
// on and the reason, and the other rows are returned. More than
// opts.MaxRows rows is a *TooManyRowsError.
//
// It is a single pass over the bytes written for this one shape, which
// reads readings several times faster than encoding/json (see
// BenchmarkParseReadingsJSON).
func ParseReadingsJSON(body []byte, opts ParseOptions) (ReadingBatch, error) {
	d := &jsonScanner{buf: body, line: 1, names: interner{}}
	return d.readings(opts)
}

// maxJSONDepth bounds the nesting the scanner follows while it skips a
// value of the wrong type.
const maxJSONDepth = 256

// jsonScanner walks a JSON body.
type jsonScanner struct {
	buf     []byte
	pos     int
	line    int
	names   interner
	slab    floatSlab
	scratch []byte
	// follows[c+1]-1 is the key that followed key c last time (c =
	// noColumn: the first key); 0 when not seen yet.
	follows [int(colValue0) + readingValueCount + 1]readingColumn
}

func (d *jsonScanner) peek() byte {
	if d.pos < len(d.buf) {
		return d.buf[d.pos]
	}
	return 0
}

// ws skips white space, counting lines.
func (d *jsonScanner) ws() {
	for d.pos < len(d.buf) {
		switch d.buf[d.pos] {
		case ' ', '\t', '\r':
			d.pos++
		case '\n':
			d.pos++
			d.line++
		default:
			return
		}
	}
}

func (d *jsonScanner) syntax(what string) *MalformedError {
	return malformed("body", d.line, "is not valid JSON at line %d (byte %d): %s", d.line, d.pos+1, what)
}

func (d *jsonScanner) readings(opts ParseOptions) (ReadingBatch, error) {
	var batch ReadingBatch
	d.ws()
	if d.pos == len(d.buf) {
		return batch, malformed("body", 0, "is empty: send a JSON array of readings")
	}
	if d.peek() != '[' {
		return batch, malformed("body", d.line, "must be a JSON array of readings")
	}
	d.pos++
	d.ws()
	// Every reading is an object, so the braces bound the row count.
	estimate := bytes.Count(d.buf[d.pos:], []byte{'{'})
	if opts.MaxRows > 0 {
		estimate = min(estimate, opts.MaxRows+1)
	}
	batch.Rows = make([]Reading, 0, estimate)
	if d.peek() == ']' {
		d.pos++
	} else {
		for row := 1; ; row++ {
			if opts.MaxRows > 0 && row > opts.MaxRows {
				return ReadingBatch{}, &TooManyRowsError{Limit: opts.MaxRows}
			}
			line := d.line
			if d.peek() == '{' {
				rd, errs, err := d.object(row, line)
				if err != nil {
					return ReadingBatch{}, err
				}
				if len(errs) > 0 {
					batch.Refused = append(batch.Refused, errs...)
				} else {
					batch.Rows = append(batch.Rows, rd)
				}
			} else {
				if err := d.skipValue(0); err != nil {
					return ReadingBatch{}, err
				}
				batch.Refused = append(batch.Refused, FieldError{Field: "row", Row: row, Line: line, Reason: "must be a JSON object"})
			}
			d.ws()
			c := d.peek()
			if c == ']' {
				d.pos++
				break
			}
			if c != ',' {
				return ReadingBatch{}, d.syntax("expected , or ] after a reading")
			}
			d.pos++
			d.ws()
		}
	}
	d.ws()
	if d.pos != len(d.buf) {
		return ReadingBatch{}, d.syntax("data after the array")
	}
	return batch, nil
}

// object reads one reading. Type errors are returned as field errors of
// the row; syntax errors and unknown keys as the error.
func (d *jsonScanner) object(row, line int) (Reading, []FieldError, error) {
	rd := Reading{Row: row, Line: line}
	var (
		errs []FieldError
		seen [int(colValue0) + readingValueCount]bool
	)
	fail := func(c readingColumn, reason string) {
		errs = append(errs, FieldError{Field: c.name(), Row: row, Line: line, Reason: reason})
	}
	d.pos++ // {
	d.ws()
	if d.peek() == '}' {
		d.pos++
		return rd, nil, nil
	}
	prev := noColumn
	for {
		if d.peek() != '"' {
			return rd, nil, d.syntax("expected a quoted key")
		}
		col, err := d.key(prev, row, line)
		if err != nil {
			return rd, nil, err
		}
		prev = col
		d.ws()
		if d.peek() != ':' {
			return rd, nil, d.syntax("expected : after a key")
		}
		d.pos++
		d.ws()
		if seen[col] {
			fail(col, "is given twice")
			if err := d.skipValue(0); err != nil {
				return rd, nil, err
			}
		} else {
			seen[col] = true
			if err := d.field(&rd, col, fail); err != nil {
				return rd, nil, err
			}
		}
		d.ws()
		switch d.peek() {
		case ',':
			d.pos++
			d.ws()
		case '}':
			d.pos++
			return rd, errs, nil
		default:
			return rd, nil, d.syntax("expected , or } in a reading")
		}
	}
}

// field reads the value of column col into rd.
func (d *jsonScanner) field(rd *Reading, col readingColumn, fail func(readingColumn, string)) error {
	c := d.peek()
	if c == 'n' {
		return d.literal("null")
	}
	switch col {
	case colSite, colPosition:
		if c != '"' {
			fail(col, "must be a JSON string")
			return d.skipValue(0)
		}
		s, err := d.str()
		if err != nil {
			return err
		}
		v := intern(d.names, trimSpace(s))
		if col == colSite {
			rd.Site = v
		} else {
			rd.Position = v
		}
	case colAt:
		if c != '"' {
			fail(col, "must be a JSON string holding an RFC 3339 time")
			return d.skipValue(0)
		}
		s, err := d.str()
		if err != nil {
			return err
		}
		t, ok := parseTime(string(s))
		if !ok {
			fail(col, reasonNotTime)
		}
		rd.At = t
	default:
		if c != '-' && (c < '0' || c > '9') {
			fail(col, "must be a JSON number or null")
			return d.skipValue(0)
		}
		b, err := d.number()
		if err != nil {
			return err
		}
		v, why := parseNumber(string(b))
		if why != "" {
			fail(col, why)
			return nil
		}
		rd.setValue(col, d.slab.put(v))
	}
	return nil
}

// key reads a key of an object; prev is the key before it (noColumn for
// the first). Gateways write every object with the same keys in the same
// order, perhaps with some left out, so the key that followed prev last
// time is tried first, as one comparison of bytes; any other key is read
// in full and looked up.
func (d *jsonScanner) key(prev readingColumn, row, line int) (readingColumn, error) {
	slot := prev + 1
	if d.follows[slot] > 0 {
		want := d.follows[slot] - 1
		lit := quotedColumns[want]
		if end := d.pos + len(lit); end <= len(d.buf) && string(d.buf[d.pos:end]) == lit {
			d.pos = end
			return want, nil
		}
	}
	key, err := d.str()
	if err != nil {
		return 0, err
	}
	col, ok := inputColumnOf(key)
	if !ok {
		return 0, unknownColumn(string(key), row, line)
	}
	d.follows[slot] = col + 1
	return col, nil
}

// noColumn stands before the first key of an object.
const noColumn readingColumn = -1

// quotedColumns holds each input column's name as a quoted JSON string.
var quotedColumns = func() [int(colValue0) + readingValueCount]string {
	var out [int(colValue0) + readingValueCount]string
	for c := range out {
		out[c] = `"` + readingColumn(c).name() + `"`
	}
	return out
}()

// inputColumnOf maps a key to its column without allocating.
func inputColumnOf(key []byte) (readingColumn, bool) {
	switch string(key) {
	case "site":
		return colSite, true
	case "position":
		return colPosition, true
	case "at":
		return colAt, true
	case "internal_air_c":
		return colValue0, true
	case "ambient_c":
		return colValue0 + 1, true
	case "heatsink_c":
		return colValue0 + 2, true
	case "current_a":
		return colValue0 + 3, true
	case "peak_current_a":
		return colValue0 + 4, true
	case "frequency_hz":
		return colValue0 + 5, true
	case "bus_v":
		return colValue0 + 6, true
	case "bus_ripple_v":
		return colValue0 + 7, true
	case "run_hours_h":
		return colValue0 + 8, true
	case "power_on_hours_h":
		return colValue0 + 9, true
	case "drive_capacitor_life_used_fraction":
		return colValue0 + 10, true
	case "drive_fan_life_used_fraction":
		return colValue0 + 11, true
	case "capacitance_uf":
		return colValue0 + 12, true
	case "esr_milliohm":
		return colValue0 + 13, true
	}
	return 0, false
}

// literal reads true, false or null.
func (d *jsonScanner) literal(word string) error {
	if !bytes.HasPrefix(d.buf[d.pos:], []byte(word)) {
		return d.syntax("expected " + word)
	}
	d.pos += len(word)
	return nil
}

// number reads a JSON number and returns its text.
func (d *jsonScanner) number() ([]byte, error) {
	start := d.pos
	digits := func() int {
		n := 0
		for d.pos < len(d.buf) && d.buf[d.pos] >= '0' && d.buf[d.pos] <= '9' {
			d.pos++
			n++
		}
		return n
	}
	if d.peek() == '-' {
		d.pos++
	}
	switch c := d.peek(); {
	case c == '0':
		d.pos++
	case c >= '1' && c <= '9':
		digits()
	default:
		return nil, d.syntax("malformed number")
	}
	if d.peek() == '.' {
		d.pos++
		if digits() == 0 {
			return nil, d.syntax("malformed number")
		}
	}
	if c := d.peek(); c == 'e' || c == 'E' {
		d.pos++
		if c := d.peek(); c == '+' || c == '-' {
			d.pos++
		}
		if digits() == 0 {
			return nil, d.syntax("malformed number")
		}
	}
	return d.buf[start:d.pos], nil
}

// str reads a string and returns its contents, unescaped. The result may
// share memory with the scanner and is valid until the next call.
func (d *jsonScanner) str() ([]byte, error) {
	d.pos++ // opening quote
	start := d.pos
	ascii := true
	for d.pos < len(d.buf) {
		c := d.buf[d.pos]
		switch {
		case c == '"':
			d.pos++
			out := d.buf[start : d.pos-1]
			if !ascii && !utf8.Valid(out) {
				return d.validUTF8(out), nil
			}
			return out, nil
		case c == '\\':
			return d.strEscaped(start)
		case c < 0x20:
			return nil, d.syntax("control character in a string")
		case c >= utf8.RuneSelf:
			ascii = false
		}
		d.pos++
	}
	return nil, d.syntax("unterminated string")
}

// validUTF8 replaces each byte of b that is not part of valid UTF-8 with
// U+FFFD, as encoding/json does. The result lives in scratch.
func (d *jsonScanner) validUTF8(b []byte) []byte {
	out := d.scratch[:0]
	for len(b) > 0 {
		r, size := utf8.DecodeRune(b)
		if r == utf8.RuneError && size == 1 {
			out = utf8.AppendRune(out, utf8.RuneError)
		} else {
			out = append(out, b[:size]...)
		}
		b = b[size:]
	}
	d.scratch = out
	return out
}

// strEscaped finishes a string that holds escapes.
func (d *jsonScanner) strEscaped(start int) ([]byte, error) {
	out := append(d.scratch[:0], d.buf[start:d.pos]...)
	for d.pos < len(d.buf) {
		c := d.buf[d.pos]
		switch {
		case c == '"':
			d.pos++
			if !utf8.Valid(out) {
				// Only raw bytes can be invalid; escapes always encode
				// valid runes.
				d.scratch = out
				fixed := append([]byte(nil), out...)
				return d.validUTF8(fixed), nil
			}
			d.scratch = out
			return out, nil
		case c < 0x20:
			return nil, d.syntax("control character in a string")
		case c != '\\':
			out = append(out, c)
			d.pos++
			continue
		}
		if d.pos+1 >= len(d.buf) {
			break
		}
		e := d.buf[d.pos+1]
		d.pos += 2
		switch e {
		case '"', '\\', '/':
			out = append(out, e)
		case 'b':
			out = append(out, '\b')
		case 'f':
			out = append(out, '\f')
		case 'n':
			out = append(out, '\n')
		case 'r':
			out = append(out, '\r')
		case 't':
			out = append(out, '\t')
		case 'u':
			r, ok := d.hex4()
			if !ok {
				return nil, d.syntax("malformed \\u escape")
			}
			if utf16.IsSurrogate(r) {
				r2 := utf8.RuneError
				if d.pos+1 < len(d.buf) && d.buf[d.pos] == '\\' && d.buf[d.pos+1] == 'u' {
					save := d.pos
					d.pos += 2
					lo, ok := d.hex4()
					if !ok {
						return nil, d.syntax("malformed \\u escape")
					}
					if pair := utf16.DecodeRune(r, lo); pair != utf8.RuneError {
						r2 = pair
					} else {
						d.pos = save // not a pair: the second escape stands alone
					}
				}
				r = r2
			}
			out = utf8.AppendRune(out, r)
		default:
			return nil, d.syntax("invalid escape in a string")
		}
	}
	return nil, d.syntax("unterminated string")
}

// hex4 reads four hex digits.
func (d *jsonScanner) hex4() (rune, bool) {
	if d.pos+4 > len(d.buf) {
		return 0, false
	}
	var r rune
	for _, c := range d.buf[d.pos : d.pos+4] {
		switch {
		case c >= '0' && c <= '9':
			r = r*16 + rune(c-'0')
		case c >= 'a' && c <= 'f':
			r = r*16 + rune(c-'a'+10)
		case c >= 'A' && c <= 'F':
			r = r*16 + rune(c-'A'+10)
		default:
			return 0, false
		}
	}
	d.pos += 4
	return r, true
}

// skipValue passes over one value of any type, checking its syntax.
func (d *jsonScanner) skipValue(depth int) error {
	if depth > maxJSONDepth {
		return d.syntax("nested too deeply")
	}
	switch c := d.peek(); {
	case c == '"':
		_, err := d.str()
		return err
	case c == 't':
		return d.literal("true")
	case c == 'f':
		return d.literal("false")
	case c == 'n':
		return d.literal("null")
	case c == '-' || (c >= '0' && c <= '9'):
		_, err := d.number()
		return err
	case c == '[':
		d.pos++
		d.ws()
		if d.peek() == ']' {
			d.pos++
			return nil
		}
		for {
			if err := d.skipValue(depth + 1); err != nil {
				return err
			}
			d.ws()
			switch d.peek() {
			case ',':
				d.pos++
				d.ws()
			case ']':
				d.pos++
				return nil
			default:
				return d.syntax("expected , or ] in an array")
			}
		}
	case c == '{':
		d.pos++
		d.ws()
		if d.peek() == '}' {
			d.pos++
			return nil
		}
		for {
			if d.peek() != '"' {
				return d.syntax("expected a quoted key")
			}
			if _, err := d.str(); err != nil {
				return err
			}
			d.ws()
			if d.peek() != ':' {
				return d.syntax("expected : after a key")
			}
			d.pos++
			d.ws()
			if err := d.skipValue(depth + 1); err != nil {
				return err
			}
			d.ws()
			switch d.peek() {
			case ',':
				d.pos++
				d.ws()
			case '}':
				d.pos++
				return nil
			default:
				return d.syntax("expected , or } in an object")
			}
		}
	}
	return d.syntax("expected a value")
}
