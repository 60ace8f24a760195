package store_test

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"

	"kelvard/store"
)

const fuzzMaxRows = 64

// checkBatch holds what every parse must satisfy: rows and refusals
// numbered within the limit, each row number used once, finite values, and
// a reason for every refusal.
func checkBatch(t *testing.T, b store.ReadingBatch, err error) {
	t.Helper()
	var (
		me *store.MalformedError
		tm *store.TooManyRowsError
	)
	switch {
	case err == nil:
	case errors.As(err, &me):
		if len(me.Fields) == 0 || me.Fields[0].Field == "" || me.Fields[0].Reason == "" {
			t.Fatalf("malformed error names nothing: %+v", me)
		}
		return
	case errors.As(err, &tm):
		if tm.Limit != fuzzMaxRows {
			t.Fatalf("too many rows with limit %d", tm.Limit)
		}
		return
	default:
		t.Fatalf("unexpected error type %T: %v", err, err)
	}
	good := map[int]bool{}
	for _, r := range b.Rows {
		if r.Row < 1 || r.Row > fuzzMaxRows || good[r.Row] || r.Line < 1 {
			t.Fatalf("row numbered %d (line %d)", r.Row, r.Line)
		}
		good[r.Row] = true
		for _, v := range []*float64{r.InternalAirC, r.AmbientC, r.HeatsinkC, r.CurrentA, r.PeakCurrentA, r.FrequencyHz, r.BusV,
			r.BusRippleV, r.RunHoursH, r.PowerOnHoursH, r.DriveCapacitorLifeUsedFraction, r.DriveFanLifeUsedFraction,
			r.CapacitanceUF, r.ESRMilliohm} {
			if v != nil && (math.IsNaN(*v) || math.IsInf(*v, 0)) {
				t.Fatalf("row %d holds a non-finite value", r.Row)
			}
		}
	}
	for _, e := range b.Refused {
		if e.Row < 1 || e.Row > fuzzMaxRows || good[e.Row] || e.Reason == "" || e.Field == "" {
			t.Fatalf("refusal %+v", e)
		}
	}
}

func FuzzParseReadingsCSV(f *testing.F) {
	var body bytes.Buffer
	if err := store.WriteReadingsCSV(&body, sampleRows(12), store.ReadingInputColumns()); err != nil {
		f.Fatal(err)
	}
	f.Add(body.Bytes())
	for _, s := range []string{
		"position,at,ambient_c\nP-1,2024-03-01T00:00:00Z,21\n",
		"\uFEFFsite,position,at\r\n\"A, B\",P-1,2024-03-01T00:00:00+05:30\r\n",
		"position,at,current_a\nP-1,2024-03-01T00:00:00Z,NaN\nP-1,x,1e400\nP-1\n",
		"position,at\n\"P\n1\",2024-03-01T00:00:00Z\n",
		"position,at,ambient_f\n",
		"at\n\n\n2024-02-30T00:00:00Z\n",
		"",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := store.ParseReadingsCSV(data, store.ParseOptions{MaxRows: fuzzMaxRows})
		checkBatch(t, b, err)
		// Without quotes the hand split must read exactly what
		// encoding/csv reads.
		if bytes.IndexByte(data, '"') < 0 {
			ref, refErr := store.ParseCSVQuoted(data, store.ParseOptions{MaxRows: fuzzMaxRows})
			if !reflect.DeepEqual(normal(b), normal(ref)) || !reflect.DeepEqual(err, refErr) {
				t.Fatalf("hand split and encoding/csv differ on %q:\n%+v %v\n%+v %v", data, b, err, ref, refErr)
			}
		}
		if err != nil {
			return
		}
		// What was read writes back and reads again to the same rows.
		var out bytes.Buffer
		if err := store.WriteReadingsCSV(&out, b.Rows, store.ReadingInputColumns()); err != nil {
			t.Fatal(err)
		}
		again, err := store.ParseReadingsCSV(out.Bytes(), store.ParseOptions{})
		if err != nil || len(again.Refused) != 0 || len(again.Rows) != len(b.Rows) {
			t.Fatalf("round trip: %v, %d refused, %d rows of %d\n%q", err, len(again.Refused), len(again.Rows), len(b.Rows), out.String())
		}
		for i := range b.Rows {
			x, y := b.Rows[i], again.Rows[i]
			x.Row, x.Line, y.Row, y.Line = 0, 0, 0, 0
			if !reflect.DeepEqual(x, y) {
				t.Fatalf("round trip of row %d:\n%+v\n%+v", i+1, x, y)
			}
		}
	})
}

func FuzzParseReadingsJSON(f *testing.F) {
	f.Add(readingsJSON(sampleRows(12)))
	for _, s := range []string{
		`[{"position":"P-1","at":"2024-03-01T00:00:00Z","ambient_c":21.5,"bus_v":null}]`,
		`[{"position":"P\u002d1","site":"\ud83d\ude00","at":"2024-03-01T00:00:00.5-01:00"},{}]`,
		`[{"at":1},{"ambient_c":"x"},7,[],{"bus_v":1,"bus_v":2},{"heatsink_c":{"a":[1,{"b":null}]}}]`,
		`[{"ambient_c":1e999},{"current_a":-0.0e-7}]`,
		`[{"drive_id":1}]`,
		`{"position":"P-1"}`,
		`[{"position":"P-1"},]`,
		`[`,
		` [ ] `,
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		b, err := store.ParseReadingsJSON(data, store.ParseOptions{MaxRows: fuzzMaxRows})
		checkBatch(t, b, err)
		valid := json.Valid(data)
		var me *store.MalformedError
		switch {
		case err == nil && !valid:
			t.Fatalf("accepted invalid JSON %q", data)
		case errors.As(err, &me) && valid:
			// Valid JSON may be refused only for its shape: not an array
			// of objects, a key that is not a reading column, or nesting
			// deeper than the scanner follows.
			var elems []json.RawMessage
			if json.Unmarshal(data, &elems) != nil {
				return
			}
			for _, e := range elems {
				var obj map[string]json.RawMessage
				if json.Unmarshal(e, &obj) != nil {
					continue
				}
				for k := range obj {
					if !isInputColumn(k) {
						return
					}
				}
			}
			if strings.Contains(me.Fields[0].Reason, "nested too deeply") {
				return
			}
			t.Fatalf("refused valid JSON %q: %v", data, err)
		}
		if err != nil {
			return
		}
		// Every row taken agrees with encoding/json's reading of its
		// object.
		var elems []json.RawMessage
		if err := json.Unmarshal(data, &elems); err != nil {
			t.Fatalf("encoding/json cannot read what was accepted: %v", err)
		}
		if len(elems) != len(b.Rows)+countRows(b.Refused) {
			t.Fatalf("%d elements, %d rows and %d refused rows", len(elems), len(b.Rows), countRows(b.Refused))
		}
		for _, r := range b.Rows {
			compareWithStdlib(t, elems[r.Row-1], r)
		}
	})
}

// normal makes empty lists nil, so two batches compare by content.
func normal(b store.ReadingBatch) store.ReadingBatch {
	if len(b.Rows) == 0 {
		b.Rows = nil
	}
	if len(b.Refused) == 0 {
		b.Refused = nil
	}
	return b
}

func isInputColumn(k string) bool {
	for _, c := range store.ReadingInputColumns() {
		if c == k {
			return true
		}
	}
	return false
}

// countRows counts the distinct rows refusals name.
func countRows(fe []store.FieldError) int {
	rows := map[int]bool{}
	for _, e := range fe {
		rows[e.Row] = true
	}
	return len(rows)
}

// compareWithStdlib decodes one object with encoding/json and checks the
// scanner read the same values.
func compareWithStdlib(t *testing.T, raw json.RawMessage, r store.Reading) {
	t.Helper()
	var obj map[string]any
	dec := json.NewDecoder(bytes.NewReader(raw))
	dec.UseNumber()
	if err := dec.Decode(&obj); err != nil {
		t.Fatalf("row %d: encoding/json: %v", r.Row, err)
	}
	text := func(k, got string) {
		v, ok := obj[k].(string)
		if !ok {
			v = ""
		}
		if strings.Trim(v, " \t\n\r\v\f") != got {
			t.Fatalf("row %d %s: %q, encoding/json reads %q", r.Row, k, got, v)
		}
	}
	text("site", r.Site)
	text("position", r.Position)
	if s, ok := obj["at"].(string); ok {
		want, err := time.Parse(time.RFC3339Nano, s)
		if err != nil || !want.Equal(r.At) {
			t.Fatalf("row %d at: %v, time.Parse reads %v (%v)", r.Row, r.At, want, err)
		}
	} else if !r.At.IsZero() {
		t.Fatalf("row %d at: %v from %v", r.Row, r.At, obj["at"])
	}
	rv := reflect.ValueOf(r)
	for i, col := range store.ReadingValueColumns() {
		got := rv.Field(5 + i).Interface().(*float64)
		n, ok := obj[col].(json.Number)
		if !ok {
			if got != nil {
				t.Fatalf("row %d %s: %v from %v", r.Row, col, *got, obj[col])
			}
			continue
		}
		want, err := n.Float64()
		if err != nil || got == nil || *got != want {
			t.Fatalf("row %d %s: %v, encoding/json reads %v (%v)", r.Row, col, got, want, err)
		}
	}
}
