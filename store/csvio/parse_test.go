package csvio

import (
	"errors"
	"io"
	"slices"
	"strings"
	"testing"
	"testing/iotest"
	"time"

	"kelvard/store"
)

func mustSpec(t testing.TB, k Kind) *spec {
	t.Helper()
	sp, err := specOf(k)
	if err != nil {
		t.Fatal(err)
	}
	return sp
}

// TestParse checks how files are read: the header, the lines rows are
// reported at, blank rows, quoting, line endings and each cell type.
func TestParse(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		name string
		kind Kind
		text string
		// rows lists, per parsed row, its line and its cells as formatCell
		// writes them (sorted "column=value").
		rows [][]string
		// rowErrs lists "line:column" of every cell problem.
		rowErrs []string
		// fileErrs lists "line:field" of a failure of the whole file.
		fileErrs []string
	}{
		{name: "plain", kind: KindSites, text: "name,elevation_m\nA,12.5\nB,-3\n",
			rows: [][]string{{"2", "elevation_m=12.5", "name=A"}, {"3", "elevation_m=-3", "name=B"}}},
		{name: "BOM and CRLF", kind: KindSites, text: "\uFEFFname,notes\r\nA,x\r\nB,y\r\n",
			rows: [][]string{{"2", "name=A", "notes=x"}, {"3", "name=B", "notes=y"}}},
		{name: "blank lines and empty rows", kind: KindSites, text: "name\n\nA\n,\n   \n\nB\n\n\n",
			rows: [][]string{{"3", "name=A"}, {"7", "name=B"}}},
		{name: "empty-cell rows are skipped", kind: KindSites, text: "name,notes\nA,\n,\n , \n",
			rows: [][]string{{"2", "name=A"}}},
		{name: "quoted field over two lines keeps the next row's line", kind: KindSites,
			text: "name,notes\nA,\"one\ntwo\"\nB,\"say \"\"hi\"\"\"\n",
			rows: [][]string{{"2", "name=A", "notes=one\ntwo"}, {"4", "name=B", `notes=say "hi"`}}},
		{name: "words are trimmed, free text is not", kind: KindSites, text: "name,notes\n  A  ,  spaced  \n",
			rows: [][]string{{"2", "name=A", "notes=  spaced  "}}},
		{name: "empty cell is not given", kind: KindSites, text: "name,elevation_m,notes\nA,,\n",
			rows: [][]string{{"2", "name=A"}}},
		{name: "header only", kind: KindSites, text: "name,elevation_m\n", rows: nil},
		{name: "header names trimmed", kind: KindSites, text: " name , elevation_m \nA,1\n",
			rows: [][]string{{"2", "elevation_m=1", "name=A"}}},
		{name: "booleans any case", kind: KindAreas, text: "site,name,environment.condensation,environment.salt_air\nS,A,TRUE,False\n",
			rows: [][]string{{"2", "environment.condensation=true", "environment.salt_air=false", "name=A", "site=S"}}},
		{name: "times to UTC microseconds", kind: KindEvents,
			text: "serial,at,type\nX,2024-05-06T09:00:00.1234567+02:00,trip\n",
			rows: [][]string{{"2", "at=2024-05-06T07:00:00.123456Z", "serial=X", "type=trip"}}},
		{name: "carrier table", kind: KindModels, text: "name,carrier_derate\nA,6:0.90; 8:0.80;\nB,none\nC,NONE\n",
			rows: [][]string{{"2", "carrier_derate=6:0.9;8:0.8", "name=A"}, {"3", "carrier_derate=none", "name=B"}, {"4", "carrier_derate=none", "name=C"}}},
		{name: "integers", kind: KindModels, text: "name,supply_phases,spares_on_hand\nA,3,12\n",
			rows: [][]string{{"2", "name=A", "spares_on_hand=12", "supply_phases=3"}}},
		{name: "bad cells", kind: KindModels,
			text: "name,voltage_class_v,supply_phases,conformal_coating,carrier_derate\n" +
				"A,4OO,3.5,yes,6-0.9\n" +
				"B,NaN,3,true,6:0.9\n" +
				"C,Inf,3,true,;\n",
			rows:    [][]string{{"2", "name=A"}, {"3", "carrier_derate=6:0.9", "conformal_coating=true", "name=B", "supply_phases=3"}, {"4", "conformal_coating=true", "name=C", "supply_phases=3"}},
			rowErrs: []string{"2:voltage_class_v", "2:supply_phases", "2:conformal_coating", "2:carrier_derate", "3:voltage_class_v", "4:voltage_class_v", "4:carrier_derate"}},
		{name: "bad time", kind: KindEvents, text: "serial,at,type\nX,2024-05-06 07:00,trip\n",
			rows: [][]string{{"2", "serial=X", "type=trip"}}, rowErrs: []string{"2:at"}},
		{name: "wrong cell count", kind: KindSites, text: "name,notes\nA\nB,x,y\nC,z\n",
			rows:    [][]string{{"2"}, {"3"}, {"4", "name=C", "notes=z"}},
			rowErrs: []string{"2:row", "3:row"}},
		{name: "key required", kind: KindPositions, text: "site,tag,area\nS,,A\n,T,A\n",
			rows:    [][]string{{"2", "area=A", "site=S"}, {"3", "area=A", "tag=T"}},
			rowErrs: []string{"2:tag", "3:site"}},
		{name: "event needs a drive or a position", kind: KindEvents, text: "serial,site,position,at,type\n,,,2024-01-01T00:00:00Z,trip\n,,P1,2024-01-01T00:00:00Z,trip\n",
			rows:    [][]string{{"2", "at=2024-01-01T00:00:00Z", "type=trip"}, {"3", "at=2024-01-01T00:00:00Z", "position=P1", "type=trip"}},
			rowErrs: []string{"2:serial", "3:site"}},
		{name: "invalid UTF-8 and NUL", kind: KindSites, text: "name,notes\nA,\xff\xfe\nB,a\x00b\n",
			rows:    [][]string{{"2", "name=A"}, {"3", "name=B"}},
			rowErrs: []string{"2:notes", "3:notes"}},
		{name: "unknown and repeated columns", kind: KindSites, text: "name,height,name,,colour\n",
			fileErrs: []string{"1:height", "1:name", "1:column 4", "1:colour", "1:header"}},
		{name: "key column missing", kind: KindAreas, text: "name,notes\nA,\n", fileErrs: []string{"1:site"}},
		{name: "events without serial or position", kind: KindEvents, text: "at,type\n", fileErrs: []string{"1:serial"}},
		{name: "empty file", kind: KindSites, text: "", fileErrs: []string{"1:header"}},
		{name: "only a BOM", kind: KindSites, text: "\uFEFF", fileErrs: []string{"1:header"}},
		{name: "a BOM is read once", kind: KindSites, text: "\uFEFF\uFEFFname\n", fileErrs: []string{"1:\uFEFFname", "1:header", "1:name"}},
		{name: "stray quote", kind: KindSites, text: "name,notes\nA,ok\nB,say \"hi\"\nC,x\n", fileErrs: []string{"3:csv"}},
		{name: "unterminated quote", kind: KindSites, text: "name,notes\nA,\"open\n", fileErrs: []string{"2:csv"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			tbl, err := parse(mustSpec(t, c.kind), strings.NewReader(c.text))
			if c.fileErrs != nil {
				var ve *store.ValidationError
				if !errors.As(err, &ve) {
					t.Fatalf("parse: %v, want a validation error", err)
				}
				if got := lines(ve.Fields); !slices.Equal(got, c.fileErrs) {
					t.Errorf("file errors %v, want %v (%v)", got, c.fileErrs, err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			var got [][]string
			var errs []string
			for _, r := range tbl.rows {
				cells := []string{itoa(r.line)}
				var kv []string
				for k, v := range r.vals {
					kv = append(kv, k+"="+formatCell(v))
				}
				slices.Sort(kv)
				got = append(got, append(cells, kv...))
				errs = append(errs, lines(r.errs)...)
			}
			if !slices.EqualFunc(got, c.rows, slices.Equal) {
				t.Errorf("rows %q, want %q", got, c.rows)
			}
			if !slices.Equal(errs, c.rowErrs) {
				t.Errorf("row errors %v, want %v", errs, c.rowErrs)
			}
			for i, r := range tbl.rows {
				if r.n != i+1 {
					t.Errorf("row %d numbered %d", i+1, r.n)
				}
			}
		})
	}
}

// TestParseReaderError: a failing reader is an error of its own, wrapped,
// not a validation error.
func TestParseReaderError(t *testing.T) {
	t.Parallel()
	boom := errors.New("disk gone")
	_, err := parse(mustSpec(t, KindSites), io.MultiReader(strings.NewReader("name\nA\n"), iotest.ErrReader(boom)))
	var ve *store.ValidationError
	if !errors.Is(err, boom) || errors.As(err, &ve) {
		t.Errorf("parse over a failing reader: %v", err)
	}
}

// TestCells checks that every cell type writes a value that reads back as
// the same value.
func TestCells(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		typ  cellType
		in   string
		out  string
		fail bool
	}{
		{typ: cellNumber, in: "0.1", out: "0.1"},
		{typ: cellNumber, in: "1e6", out: "1000000"},
		{typ: cellNumber, in: "-0.000001", out: "-0.000001"},
		{typ: cellNumber, in: "814.5870119269027", out: "814.5870119269027"},
		{typ: cellNumber, in: "1,5", fail: true},
		{typ: cellNumber, in: "inf", fail: true},
		{typ: cellInteger, in: "-4", out: "-4"},
		{typ: cellInteger, in: "4.0", fail: true},
		{typ: cellBool, in: "True", out: "true"},
		{typ: cellBool, in: "1", fail: true},
		{typ: cellTime, in: "2024-01-31T23:59:59.9999999-01:00", out: "2024-02-01T00:59:59.999999Z"},
		{typ: cellTime, in: "2024-01-31", fail: true},
		{typ: cellCarrier, in: "6:0.9;12:0.65", out: "6:0.9;12:0.65"},
		{typ: cellCarrier, in: "6", fail: true},
		{typ: cellCarrier, in: "6:x", fail: true},
		{typ: cellWord, in: "G3", out: "G3"},
	} {
		v, err := parseCell(c.typ, c.in)
		if c.fail {
			if err == nil {
				t.Errorf("parseCell(%d, %q) = %v, want an error", c.typ, c.in, v)
			}
			continue
		}
		if err != nil {
			t.Errorf("parseCell(%d, %q): %v", c.typ, c.in, err)
			continue
		}
		if got := formatCell(v); got != c.out {
			t.Errorf("parseCell(%d, %q) writes back as %q, want %q", c.typ, c.in, got, c.out)
		}
		again, err := parseCell(c.typ, formatCell(v))
		if err != nil || formatCell(again) != c.out {
			t.Errorf("%q does not read back: %v, %v", c.out, again, err)
		}
	}
	if _, ok := mustTime(t, "2024-01-01T00:00:00Z").(time.Time); !ok {
		t.Error("a time cell is not a time.Time")
	}
}

func mustTime(t *testing.T, s string) any {
	t.Helper()
	v, err := parseCell(cellTime, s)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestColumnsEveryKind: every kind's columns resolve, and the key columns
// are among them.
func TestColumnsEveryKind(t *testing.T) {
	t.Parallel()
	for _, k := range Kinds() {
		cols, err := Columns(k)
		if err != nil {
			t.Fatalf("%s: %v", k, err)
		}
		for _, key := range mustSpec(t, k).key {
			if !slices.Contains(cols, key) {
				t.Errorf("%s: key %s is not a column", k, key)
			}
		}
	}
	if _, err := Columns(KindReadings); !errors.Is(err, ErrNotAvailable) {
		t.Errorf("readings columns: %v", err)
	}
	if _, err := ParseKind("pumps"); !errors.Is(err, ErrUnknownKind) {
		t.Errorf("ParseKind(pumps): %v", err)
	}
	if k, err := ParseKind("readings"); err != nil || k != KindReadings {
		t.Errorf("ParseKind(readings): %v, %v", k, err)
	}
}
