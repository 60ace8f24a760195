package csvio

import (
	"bytes"
	"encoding/csv"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"kelvard/store"
)

// FuzzRegisterCSV feeds arbitrary bytes to the register CSV parser of every
// kind. It must never panic; what it accepts must be well formed (rows in
// line order, values only for header columns, problems on their row's
// line); and the values it reads, written back out as CSV, must read back
// the same.
func FuzzRegisterCSV(f *testing.F) {
	for i, k := range Kinds() {
		for _, dir := range []string{"register", "golden"} {
			b, err := os.ReadFile(filepath.Join("testdata", dir, string(k)+".csv"))
			if err != nil {
				f.Fatal(err)
			}
			f.Add(uint8(i), b)
		}
	}
	for _, s := range []string{"", "\uFEFF", "name\n\"", "name,notes\r\nA,\"x\r\ny\"\r\n", "name,\n,,,\n", "a\x00b\n\xff",
		"serial,at,type\nX,2024-01-01T00:00:00Z,trip\n", "name,carrier_derate\nA,6:1;;7:0.5\n"} {
		f.Add(uint8(0), []byte(s))
		f.Add(uint8(2), []byte(s))
	}
	kinds := Kinds()
	f.Fuzz(func(t *testing.T, which uint8, data []byte) {
		sp, err := specOf(kinds[int(which)%len(kinds)])
		if err != nil {
			t.Fatal(err)
		}
		tbl, err := parse(sp, bytes.NewReader(data))
		if err != nil {
			var ve *store.ValidationError
			if !errors.As(err, &ve) || len(ve.Fields) == 0 {
				t.Fatalf("parse failed without naming a problem: %v", err)
			}
			return
		}
		last := 1
		for i, r := range tbl.rows {
			if r.line <= last || r.n != i+1 {
				t.Fatalf("row %d at line %d after line %d", r.n, r.line, last)
			}
			last = r.line
			for col := range r.vals {
				if !tbl.has(col) {
					t.Fatalf("line %d has a value for %q, which the header does not name", r.line, col)
				}
			}
			for _, e := range r.errs {
				if e.Line != r.line || e.Row != r.n || e.Field == "" || e.Reason == "" {
					t.Fatalf("problem %+v does not name row %d at line %d", e, r.n, r.line)
				}
			}
		}
		// Write what was read and read it again.
		var buf bytes.Buffer
		w := csv.NewWriter(&buf)
		if err := w.Write(tbl.header); err != nil {
			t.Fatal(err)
		}
		var kept []*row
		for _, r := range tbl.rows {
			if len(r.errs) > 0 || len(r.vals) == 0 {
				continue
			}
			cells := make([]string, len(tbl.header))
			for i, col := range tbl.header {
				if v, ok := r.vals[col]; ok {
					cells[i] = formatCell(v)
				}
			}
			if err := w.Write(cells); err != nil {
				t.Fatal(err)
			}
			kept = append(kept, r)
		}
		w.Flush()
		again, err := parse(sp, &buf)
		if err != nil {
			t.Fatalf("reading back what was read: %v\n%q", err, buf.String())
		}
		if len(again.rows) != len(kept) {
			t.Fatalf("read back %d rows, wrote %d", len(again.rows), len(kept))
		}
		for i, r := range again.rows {
			if !sameValues(r.vals, kept[i].vals) {
				t.Fatalf("row %d read back as %v, was %v", i+1, r.vals, kept[i].vals)
			}
		}
	})
}

// sameValues compares parsed rows by their written form.
func sameValues(a, b map[string]any) bool {
	if len(a) != len(b) {
		return false
	}
	keys := make([]string, 0, len(a))
	for k := range a {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	for _, k := range keys {
		v, ok := b[k]
		if !ok || formatCell(v) != formatCell(a[k]) {
			return false
		}
	}
	return true
}
