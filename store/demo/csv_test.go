package demo

import (
	"bufio"
	"bytes"
	"encoding/csv"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/store"
)

// readCSV writes one file and parses it back.
func readCSV(t *testing.T, s *Scenario, name string) [][]string {
	t.Helper()
	var b bytes.Buffer
	if err := s.WriteCSV(name, &b); err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(&b).ReadAll()
	if err != nil {
		t.Fatalf("%s does not parse as CSV: %v", name, err)
	}
	return recs
}

func column(t *testing.T, recs [][]string, name string) int {
	t.Helper()
	j := slices.Index(recs[0], name)
	if j < 0 {
		t.Fatalf("no column %q in %v", name, recs[0])
	}
	return j
}

// jsonPaths returns the JSON field names of a register type, nested
// objects flattened with dots.
func jsonPaths(typ reflect.Type) map[string]bool {
	out := map[string]bool{}
	for i := range typ.NumField() {
		f := typ.Field(i)
		name := jsonName(f)
		if f.Type.Kind() == reflect.Struct && f.Type != reflect.TypeFor[time.Time]() {
			for k := range f.Type.NumField() {
				out[name+"."+jsonName(f.Type.Field(k))] = true
			}
			continue
		}
		out[name] = true
	}
	return out
}

// TestRegisterHeadersAreAPIFieldNames checks the register files' headers:
// natural keys, then the JSON names of the create fields (store.Info),
// nested objects flattened with dots.
func TestRegisterHeadersAreAPIFieldNames(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	cases := []struct {
		file    string
		typ     reflect.Type
		info    *store.ResourceInfo
		natural []string
		must    []string
	}{
		{FileSites, reflect.TypeFor[store.Site](), store.Info[store.Site](), nil, []string{"name", "elevation_m", "time_zone"}},
		{FileAreas, reflect.TypeFor[store.Area](), store.Info[store.Area](), []string{"site"}, []string{"environment.water", "environment.corrosion", "environment.salt_air"}},
		{FileModels, reflect.TypeFor[store.DriveModel](), store.Info[store.DriveModel](), nil,
			[]string{"carrier_derate", "capacitor.rated_life_h", "fan.runs", "enclosure.ip_code", "enclosure.nema_type", "conformal_coating"}},
		{FilePositions, reflect.TypeFor[store.Position](), store.Info[store.Position](), []string{"site", "area"},
			[]string{"tag", "cabinet.nema_type", "cabinet.cooling", "single_phase_derate_set", "carrier_khz"}},
		{FileDrives, reflect.TypeFor[store.Drive](), store.Info[store.Drive](), []string{"model", "site", "stores_area"},
			[]string{"serial", "status", "manufactured_at", "last_energised_at"}},
	}
	for _, c := range cases {
		recs := readCSV(t, s, c.file)
		paths := jsonPaths(c.typ)
		for _, h := range recs[0] {
			if slices.Contains(c.natural, h) {
				continue
			}
			top, _, _ := strings.Cut(h, ".")
			if !paths[h] || !slices.Contains(c.info.Create, top) {
				t.Errorf("%s: column %q is not a create field of the API", c.file, h)
			}
		}
		for _, h := range append(c.natural, c.must...) {
			if !slices.Contains(recs[0], h) {
				t.Errorf("%s: no column %q", c.file, h)
			}
		}
		for i, r := range recs {
			if len(r) != len(recs[0]) {
				t.Errorf("%s row %d has %d cells, header %d", c.file, i, len(r), len(recs[0]))
			}
		}
	}
	want := map[string][]string{
		FileInstallations: {"serial", "site", "position", "installed_at", "removed_at", "status_after"},
		FileComponents:    {"serial", "kind", "installed_at", "removed_at", "part", "initial_capacitance_uf", "initial_esr_milliohm", "notes"},
		FileEvents:        {"serial", "site", "position", "at", "type", "trip_cause", "state", "failure_mode", "failure_cause", "component", "notes"},
	}
	for file, cols := range want {
		if got := readCSV(t, s, file)[0]; !slices.Equal(got, cols) {
			t.Errorf("%s header %v, want %v", file, got, cols)
		}
	}
}

// TestCellFormats checks the cell conventions: carrier tables, booleans,
// RFC 3339 UTC times, and empty cells for what is not given.
func TestCellFormats(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	models := readCSV(t, s, FileModels)
	if got := models[1][column(t, models, "carrier_derate")]; got != "6:0.90;8:0.80;12:0.65;16:0.55" {
		t.Errorf("carrier_derate %q, want 6:0.90;8:0.80;12:0.65;16:0.55", got)
	}
	for _, r := range models[1:] {
		if v := r[column(t, models, "conformal_coating")]; v != "true" && v != "false" {
			t.Errorf("conformal_coating %q, want true or false", v)
		}
	}
	pos := readCSV(t, s, FilePositions)
	mount, nema := column(t, pos, "mounting"), column(t, pos, "cabinet.nema_type")
	for _, r := range pos[1:] {
		own := r[mount] == "own_enclosure"
		for j, h := range pos[0] {
			if strings.HasPrefix(h, "cabinet.") && own && r[j] != "" {
				t.Errorf("position %s in its own enclosure has %s = %q, want empty", r[2], h, r[j])
			}
		}
		if !own && r[nema] == "" {
			t.Errorf("cabinet position %s has no cabinet rating", r[2])
		}
	}
	for _, file := range []string{FileDrives, FileInstallations, FileComponents, FileEvents} {
		recs := readCSV(t, s, file)
		for j, h := range recs[0] {
			if !strings.HasSuffix(h, "_at") && h != "at" {
				continue
			}
			for _, r := range recs[1:] {
				if r[j] == "" {
					continue
				}
				if tm, err := time.Parse(time.RFC3339, r[j]); err != nil || !strings.HasSuffix(r[j], "Z") || tm.After(s.Now) {
					t.Fatalf("%s %s %q: want an RFC 3339 UTC time not after Now", file, h, r[j])
				}
			}
		}
	}
	var b bytes.Buffer
	if err := s.WriteCSV(FileReadings, &b); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(&b)
	sc.Scan()
	if got := strings.Split(sc.Text(), ","); !slices.Equal(got, readingColumns()) {
		t.Errorf("readings header %v", got)
	}
	sc.Scan()
	if cells := strings.Split(sc.Text(), ","); len(cells) != len(readingColumns()) {
		t.Errorf("first reading %q has %d cells", sc.Text(), len(cells))
	}
	if err := s.WriteCSV("nope.csv", &b); err == nil {
		t.Error("an unknown file name gave no error")
	}
}
