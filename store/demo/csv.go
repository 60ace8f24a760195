package demo

import (
	"bufio"
	"compress/gzip"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"time"

	"kelvard/store"
)

// This file writes the scenario in the register CSV format the importer
// reads (store/csvio):
//
//   - a header row of the API's JSON field names; nested objects flattened
//     with dots (environment.water, cabinet.nema_type, capacitor.rated_life_h);
//   - references by natural key instead of ids: areas name their site;
//     positions their site and area; drives their model, site and stores
//     area; installations, components and events their drive by serial and
//     position by site and tag; readings their site and position tag;
//   - carrier_derate written "6:0.90;8:0.80"; booleans true or false;
//     times RFC 3339 in UTC; numbers in their shortest form; an empty cell
//     means "not given" (a cabinet of a drive in its own enclosure, an
//     unset time, a value a drive does not log).
//
// The register files take their columns from the create fields of
// store.Info, so they follow the API's field names.

// File names, in import order.
const (
	FileSites         = "sites.csv"
	FileAreas         = "areas.csv"
	FileModels        = "models.csv"
	FilePositions     = "positions.csv"
	FileDrives        = "drives.csv"
	FileInstallations = "installations.csv"
	FileComponents    = "components.csv"
	FileEvents        = "events.csv"
	FileReadings      = "readings.csv"
)

// Files returns the CSV file names in import order.
func Files() []string {
	return []string{FileSites, FileAreas, FileModels, FilePositions, FileDrives, FileInstallations, FileComponents, FileEvents, FileReadings}
}

// WriteOptions tune WriteDir.
type WriteOptions struct {
	// GzipReadings writes readings.csv gzip-compressed as readings.csv.gz.
	GzipReadings bool
}

// WriteDir writes every file into dir, creating it if needed.
func (s *Scenario) WriteDir(dir string, opt WriteOptions) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("write demo: %w", err)
	}
	for _, name := range Files() {
		path := filepath.Join(dir, name)
		if name == FileReadings && opt.GzipReadings {
			path += ".gz"
		}
		if err := s.writeFile(path, name, name == FileReadings && opt.GzipReadings); err != nil {
			return err
		}
	}
	return nil
}

func (s *Scenario) writeFile(path, name string, gz bool) (err error) {
	f, err := os.Create(path)
	if err != nil {
		return fmt.Errorf("write demo %s: %w", name, err)
	}
	defer func() {
		if cerr := f.Close(); cerr != nil && err == nil {
			err = fmt.Errorf("write demo %s: %w", name, cerr)
		}
	}()
	var w io.Writer = f
	var zw *gzip.Writer
	if gz {
		zw = gzip.NewWriter(f) // no name and no time in the header: the bytes depend only on the data
		w = zw
	}
	if err := s.WriteCSV(name, w); err != nil {
		return err
	}
	if zw != nil {
		if err := zw.Close(); err != nil {
			return fmt.Errorf("write demo %s: %w", name, err)
		}
	}
	return nil
}

// WriteCSV writes the file with the given name (one of Files) to w.
func (s *Scenario) WriteCSV(name string, w io.Writer) error {
	if name == FileReadings {
		if err := s.writeReadings(w); err != nil {
			return fmt.Errorf("write demo %s: %w", name, err)
		}
		return nil
	}
	t, err := s.table(name)
	if err != nil {
		return err
	}
	cw := csv.NewWriter(w)
	if err := cw.Write(t.header); err != nil {
		return fmt.Errorf("write demo %s: %w", name, err)
	}
	if err := cw.WriteAll(t.rows); err != nil {
		return fmt.Errorf("write demo %s: %w", name, err)
	}
	return nil
}

// csvTable is one register file's header and rows as text.
type csvTable struct {
	header []string
	rows   [][]string
}

func (s *Scenario) table(name string) (csvTable, error) {
	switch name {
	case FileSites:
		return registerTable(store.Info[store.Site](), reflect.TypeFor[store.Site](), nil, len(s.Sites), func(i int) (any, map[string]string) {
			return s.Sites[i], nil
		}), nil
	case FileAreas:
		return registerTable(store.Info[store.Area](), reflect.TypeFor[store.Area](), map[string][]string{"site_id": {"site"}}, len(s.Areas),
			func(i int) (any, map[string]string) {
				return s.Areas[i].Area, map[string]string{"site": s.Areas[i].Site}
			}), nil
	case FileModels:
		return registerTable(store.Info[store.DriveModel](), reflect.TypeFor[store.DriveModel](), nil, len(s.Models), func(i int) (any, map[string]string) {
			return s.Models[i], nil
		}), nil
	case FilePositions:
		return registerTable(store.Info[store.Position](), reflect.TypeFor[store.Position](), map[string][]string{"area_id": {"site", "area"}}, len(s.Positions),
			func(i int) (any, map[string]string) {
				p := s.Positions[i]
				return p.Position, map[string]string{"site": p.Site, "area": p.Area}
			}), nil
	case FileDrives:
		return registerTable(store.Info[store.Drive](), reflect.TypeFor[store.Drive](),
			map[string][]string{"model_id": {"model"}, "site_id": {"site"}, "stores_area_id": {"stores_area"}}, len(s.Drives),
			func(i int) (any, map[string]string) {
				d := s.Drives[i]
				return d.Drive, map[string]string{"model": d.Model, "site": d.Site, "stores_area": d.StoresArea}
			}), nil
	case FileInstallations:
		t := csvTable{header: []string{"serial", "site", "position", "installed_at", "removed_at", "status_after"}}
		for _, in := range s.Installations {
			t.rows = append(t.rows, []string{in.Serial, in.Site, in.Position, formatTime(in.InstalledAt),
				formatTimePtr(in.RemovedAt), string(in.StatusAfter)})
		}
		return t, nil
	case FileComponents:
		t := csvTable{header: []string{"serial", "kind", "installed_at", "removed_at", "part", "initial_capacitance_uf", "initial_esr_milliohm", "notes"}}
		for _, c := range s.Components {
			t.rows = append(t.rows, []string{c.Serial, string(c.Kind), formatTime(c.InstalledAt), formatTimePtr(c.RemovedAt), c.Part,
				formatOptional(c.InitialCapacitanceUF), formatOptional(c.InitialESRMilliohm), c.Notes})
		}
		return t, nil
	case FileEvents:
		t := csvTable{header: []string{"serial", "site", "position", "at", "type", "trip_cause", "state", "failure_mode", "failure_cause", "component", "notes"}}
		for _, e := range s.Events {
			t.rows = append(t.rows, []string{e.Serial, e.Site, e.Position, formatTime(e.At), string(e.Type), string(e.TripCause),
				string(e.State), string(e.FailureMode), string(e.FailureCause), string(e.Component), e.Notes})
		}
		return t, nil
	}
	return csvTable{}, fmt.Errorf("write demo: unknown file %q (want one of %v)", name, Files())
}

// registerTable builds a register file from the create fields of a
// resource. keys maps a reference field to the natural-key columns that
// replace it; row returns the embedded store row and its natural keys.
func registerTable(info *store.ResourceInfo, typ reflect.Type, keys map[string][]string, n int, row func(i int) (any, map[string]string)) csvTable {
	var t csvTable
	type col struct {
		name    string
		natural bool
		path    []int // field path into the row, for plain columns
		parent  []int // path of the nested struct holding the field, if any
	}
	var cols []col
	for _, f := range info.Create {
		if nk, ok := keys[f]; ok {
			for _, k := range nk {
				cols = append(cols, col{name: k, natural: true})
			}
			continue
		}
		sf, ok := fieldByJSON(typ, f)
		if !ok {
			continue
		}
		ft := sf.Type
		if ft.Kind() == reflect.Struct && ft != reflect.TypeOf(time.Time{}) {
			for i := range ft.NumField() {
				sub := ft.Field(i)
				name := jsonName(sub)
				if name == "" {
					continue
				}
				cols = append(cols, col{name: f + "." + name, path: append(append([]int{}, sf.Index...), i), parent: sf.Index})
			}
			continue
		}
		cols = append(cols, col{name: f, path: sf.Index})
	}
	for _, c := range cols {
		t.header = append(t.header, c.name)
	}
	for i := range n {
		v, nat := row(i)
		rv := reflect.ValueOf(v)
		cells := make([]string, len(cols))
		for j, c := range cols {
			switch {
			case c.natural:
				cells[j] = nat[c.name]
			case c.parent != nil && rv.FieldByIndex(c.parent).IsZero():
				cells[j] = "" // a nested object not given (a cabinet of a drive in its own enclosure)
			default:
				cells[j] = formatValue(rv.FieldByIndex(c.path))
			}
		}
		t.rows = append(t.rows, cells)
	}
	return t
}

// fieldByJSON finds the struct field whose JSON name is name.
func fieldByJSON(t reflect.Type, name string) (reflect.StructField, bool) {
	for i := range t.NumField() {
		f := t.Field(i)
		if jsonName(f) == name {
			return f, true
		}
	}
	return reflect.StructField{}, false
}

func jsonName(f reflect.StructField) string {
	tag := f.Tag.Get("json")
	if tag == "-" {
		return ""
	}
	name, _, _ := strings.Cut(tag, ",")
	return name
}

// formatValue writes one register value.
func formatValue(v reflect.Value) string {
	switch x := v.Interface().(type) {
	case time.Time:
		return formatTime(x)
	case *time.Time:
		return formatTimePtr(x)
	case store.Parameters:
		if len(x) == 0 {
			return "" // no overrides: the defaults apply
		}
		b, _ := json.Marshal(x)
		return string(b)
	case []store.CarrierPoint:
		parts := make([]string, len(x))
		for i, p := range x {
			parts[i] = formatFloat(p.CarrierKHz) + ":" + strconv.FormatFloat(p.Fraction, 'f', 2, 64)
		}
		return strings.Join(parts, ";")
	}
	switch v.Kind() {
	case reflect.String:
		return v.String()
	case reflect.Bool:
		return strconv.FormatBool(v.Bool())
	case reflect.Int, reflect.Int64, reflect.Int32:
		return strconv.FormatInt(v.Int(), 10)
	case reflect.Float64:
		return formatFloat(v.Float())
	case reflect.Pointer:
		if v.IsNil() {
			return ""
		}
		return formatValue(v.Elem())
	}
	return fmt.Sprint(v.Interface())
}

func formatFloat(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

// formatOptional writes 0 as "not given".
func formatOptional(v float64) string {
	if v == 0 {
		return ""
	}
	return formatFloat(v)
}

func formatTime(t time.Time) string {
	if t.IsZero() {
		return ""
	}
	return t.UTC().Format(time.RFC3339)
}

func formatTimePtr(t *time.Time) string {
	if t == nil {
		return ""
	}
	return formatTime(*t)
}

// readingColumns are the columns of readings.csv.
func readingColumns() []string {
	return []string{"site", "position", "at", "internal_air_c", "ambient_c", "heatsink_c", "current_a", "peak_current_a",
		"frequency_hz", "bus_v", "bus_ripple_v", "run_hours_h", "power_on_hours_h", "drive_capacitor_life_used_fraction",
		"drive_fan_life_used_fraction", "capacitance_uf", "esr_milliohm"}
}

// writeReadings streams readings.csv. It formats rows by hand: a year of
// hourly readings is some seven hundred thousand rows.
func (s *Scenario) writeReadings(w io.Writer) error {
	bw := bufio.NewWriterSize(w, 1<<16)
	buf := make([]byte, 0, 256)
	for i, c := range readingColumns() {
		if i > 0 {
			buf = append(buf, ',')
		}
		buf = append(buf, c...)
	}
	buf = append(buf, '\n')
	if _, err := bw.Write(buf); err != nil {
		return err
	}
	for r := range s.Readings() {
		buf = buf[:0]
		buf = appendCSVField(buf, r.Site)
		buf = append(buf, ',')
		buf = appendCSVField(buf, r.Position)
		buf = append(buf, ',')
		buf = r.At.UTC().AppendFormat(buf, time.RFC3339)
		for _, v := range [...]float64{r.InternalAirC, r.AmbientC, r.HeatsinkC, r.CurrentA, r.PeakCurrentA, r.FrequencyHz,
			r.BusV, r.BusRippleV, r.RunHoursH, r.PowerOnHoursH, r.DriveCapacitorLifeUsedFraction, r.DriveFanLifeUsedFraction,
			r.CapacitanceUF, r.ESRMilliohm} {
			buf = append(buf, ',')
			if !math.IsNaN(v) {
				buf = strconv.AppendFloat(buf, v, 'f', -1, 64)
			}
		}
		buf = append(buf, '\n')
		if _, err := bw.Write(buf); err != nil {
			return err
		}
	}
	return bw.Flush()
}

// appendCSVField appends a field, quoted as RFC 4180 asks when it holds a
// comma, a quote or a line break.
func appendCSVField(buf []byte, s string) []byte {
	if !strings.ContainsAny(s, ",\"\r\n") {
		return append(buf, s...)
	}
	buf = append(buf, '"')
	buf = append(buf, strings.ReplaceAll(s, `"`, `""`)...)
	return append(buf, '"')
}
