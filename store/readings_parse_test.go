package store_test

import (
	"bytes"
	"errors"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/store"
)

func parseCSV(t *testing.T, body string, max int) (store.ReadingBatch, error) {
	t.Helper()
	return store.ParseReadingsCSV([]byte(body), store.ParseOptions{MaxRows: max})
}

// malformedField returns the field a *MalformedError names, or fails.
func malformedField(t *testing.T, err error) store.FieldError {
	t.Helper()
	var me *store.MalformedError
	if !errors.As(err, &me) || len(me.Fields) == 0 {
		t.Fatalf("got %v, want a malformed-body error", err)
	}
	return me.Fields[0]
}

func TestParseReadingsCSV(t *testing.T) {
	t.Parallel()
	body := "\uFEFFposition , at,ambient_c,current_a,site\r\n" +
		"P-1,2024-03-01T00:00:00Z,21.5,,North works\r\n" +
		"\r\n" +
		"\"P,2\",2024-03-01T01:00:00.123456+01:00, -3e1 ,4,\r\n" +
		"P-1,yesterday,NaN,x,\r\n" +
		"P-1,2024-03-01T02:00:00Z,22\r\n" +
		"P-1,2024-03-01T03:00:00Z,1e999,7,\r\n"
	b, err := parseCSV(t, body, 0)
	if err != nil {
		t.Fatal(err)
	}
	if len(b.Rows) != 2 {
		t.Fatalf("%d rows, want 2: %+v", len(b.Rows), b.Rows)
	}
	r := b.Rows[0]
	if r.Position != "P-1" || r.Site != "North works" || !r.At.Equal(time.Date(2024, 3, 1, 0, 0, 0, 0, time.UTC)) ||
		*r.AmbientC != 21.5 || r.CurrentA != nil || r.Row != 1 || r.Line != 2 {
		t.Errorf("row 1 %+v", r)
	}
	r = b.Rows[1]
	if r.Position != "P,2" || r.Site != "" || r.At != time.Date(2024, 3, 1, 0, 0, 0, 123456000, time.UTC) || *r.AmbientC != -30 ||
		*r.CurrentA != 4 || r.Row != 2 || r.Line != 4 {
		t.Errorf("row 2 %+v (at %v)", r, r.At)
	}
	want := []store.FieldError{
		{Field: "at", Row: 3, Line: 5, Reason: "must be an RFC 3339 time such as 2026-01-31T08:00:00Z"},
		{Field: "ambient_c", Row: 3, Line: 5, Reason: "must be a finite number"},
		{Field: "current_a", Row: 3, Line: 5, Reason: "must be a decimal number"},
		{Field: "row", Row: 4, Line: 6, Reason: "has 3 fields; the header has 5"},
		{Field: "ambient_c", Row: 5, Line: 7, Reason: "must be a finite number"},
	}
	if !reflect.DeepEqual(b.Refused, want) {
		t.Errorf("refused\n%+v\nwant\n%+v", b.Refused, want)
	}

	for _, c := range []struct{ name, body, field string }{
		{"unknown column", "position,at,ambient_f\n", "ambient_f"},
		{"output column", "drive_id,position,at\n", "drive_id"},
		{"repeated column", "position,at,at\n", "at"},
		{"no at column", "position,ambient_c\n", "at"},
		{"empty body", "", "body"},
		{"stray quote", "position,at\nP\"1,2024-03-01T00:00:00Z\n", "body"},
	} {
		_, err := parseCSV(t, c.body, 0)
		if fe := malformedField(t, err); fe.Field != c.field || fe.Reason == "" {
			t.Errorf("%s: names %+v, want %s", c.name, fe, c.field)
		}
	}
	many := "position,at\n" + strings.Repeat("P-1,2024-03-01T00:00:00Z\n", 4)
	var tm *store.TooManyRowsError
	if _, err := parseCSV(t, many, 3); !errors.As(err, &tm) || tm.Limit != 3 {
		t.Errorf("four rows over a limit of three: %v", err)
	}
	if b, err := parseCSV(t, many, 4); err != nil || len(b.Rows) != 4 {
		t.Errorf("four rows at a limit of four: %d, %v", len(b.Rows), err)
	}
}

func TestParseReadingsJSON(t *testing.T) {
	t.Parallel()
	body := `[
  {"position": "P\u002d1", "site": "North works", "at": "2024-03-01T00:00:00Z", "ambient_c": 21.5, "current_a": null},
  {"at": "2024-03-01T01:00:00Z", "position": " P-2 ", "bus_v": -0.0, "esr_milliohm": 3.25e1},
  {"position": "P-1", "at": 1709251200, "ambient_c": "21", "heatsink_c": {"nested": [1, 2]}},
  17,
  {"position": "P-1", "at": "2024-03-01T02:00:00Z", "ambient_c": 1e999, "bus_v": 1, "bus_v": 2},
  {}
]`
	b, err := store.ParseReadingsJSON([]byte(body), store.ParseOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(b.Rows) != 3 {
		t.Fatalf("%d rows, want 3: %+v", len(b.Rows), b.Rows)
	}
	if r := b.Rows[0]; r.Position != "P-1" || r.Site != "North works" || *r.AmbientC != 21.5 || r.CurrentA != nil || r.Row != 1 || r.Line != 2 {
		t.Errorf("row 1 %+v", r)
	}
	if r := b.Rows[1]; r.Position != "P-2" || *r.BusV != 0 || *r.ESRMilliohm != 32.5 || r.Row != 2 || r.Line != 3 {
		t.Errorf("row 2 %+v", r)
	}
	if r := b.Rows[2]; r.Row != 6 || r.Line != 7 || !r.At.IsZero() {
		t.Errorf("empty object %+v", r)
	}
	var got []string
	for _, e := range b.Refused {
		got = append(got, e.Field+"@"+string(rune('0'+e.Row))+":"+string(rune('0'+e.Line)))
	}
	want := []string{"at@3:4", "ambient_c@3:4", "heatsink_c@3:4", "row@4:5", "ambient_c@5:6", "bus_v@5:6"}
	if !slices.Equal(got, want) {
		t.Errorf("refused %v, want %v\n%+v", got, want, b.Refused)
	}

	for _, c := range []struct{ name, body, field string }{
		{"unknown key", `[{"position":"P-1","at":"2024-03-01T00:00:00Z","ambient_f":70}]`, "ambient_f"},
		{"output key", `[{"drive_id":1}]`, "drive_id"},
		{"object, not array", `{"position":"P-1"}`, "body"},
		{"trailing comma", `[{"position":"P-1"},]`, "body"},
		{"unclosed", `[{"position":"P-1"}`, "body"},
		{"data after", `[] []`, "body"},
		{"bad number", `[{"ambient_c": 01}]`, "body"},
		{"bad literal", `[{"ambient_c": nul}]`, "body"},
		{"control character", "[{\"position\": \"P\t1\"}]", "body"},
		{"empty", "  ", "body"},
	} {
		_, err := store.ParseReadingsJSON([]byte(c.body), store.ParseOptions{})
		if fe := malformedField(t, err); fe.Field != c.field {
			t.Errorf("%s: names %+v, want %s", c.name, fe, c.field)
		}
	}
	var tm *store.TooManyRowsError
	if _, err := store.ParseReadingsJSON([]byte(`[{},{},{}]`), store.ParseOptions{MaxRows: 2}); !errors.As(err, &tm) {
		t.Errorf("three rows over a limit of two: %v", err)
	}
	if b, err := store.ParseReadingsJSON([]byte(` [ ] `), store.ParseOptions{}); err != nil || len(b.Rows)+len(b.Refused) != 0 {
		t.Errorf("empty array: %+v, %v", b, err)
	}
}

// TestCSVAndJSONGiveIdenticalRows parses the same readings written both
// ways.
func TestCSVAndJSONGiveIdenticalRows(t *testing.T) {
	t.Parallel()
	rows := sampleRows(200)
	var csvBody bytes.Buffer
	if err := store.WriteReadingsCSV(&csvBody, rows, store.ReadingInputColumns()); err != nil {
		t.Fatal(err)
	}
	fromCSV, err := store.ParseReadingsCSV(csvBody.Bytes(), store.ParseOptions{})
	if err != nil || len(fromCSV.Refused) != 0 {
		t.Fatalf("CSV: %v %+v", err, fromCSV.Refused)
	}
	fromJSON, err := store.ParseReadingsJSON(readingsJSON(rows), store.ParseOptions{})
	if err != nil || len(fromJSON.Refused) != 0 {
		t.Fatalf("JSON: %v %+v", err, fromJSON.Refused)
	}
	for i := range rows {
		fromCSV.Rows[i].Line, fromJSON.Rows[i].Line = 0, 0
		rows[i].Row = i + 1
	}
	if !reflect.DeepEqual(fromCSV.Rows, fromJSON.Rows) {
		t.Fatal("CSV and JSON give different rows")
	}
	if !reflect.DeepEqual(fromCSV.Rows, rows) {
		t.Fatal("parsed rows differ from the rows written")
	}
}
