package csvio

import (
	"encoding/json"
	"fmt"
	"math"
	"reflect"
	"strconv"
	"strings"
	"time"

	"kelvard/store"
)

// cellType is how a column's cells are read and written.
type cellType int

const (
	// cellText is free text, kept exactly as written.
	cellText cellType = iota
	// cellWord is a name, tag, serial or enumeration value: surrounding
	// spaces are trimmed.
	cellWord
	cellNumber
	cellInteger
	cellBool
	cellTime
	// cellCarrier is a carrier derating table, "6:0.90;8:0.80" or "none".
	cellCarrier
	// cellParameters is a parameter override object in JSON, such as
	// {"data_quality":{"silent_after_s":7200}}; empty for none.
	cellParameters
)

// column is one CSV column of a kind.
type column struct {
	name string
	typ  cellType
	// index locates the model field the column maps to; nil for a
	// reference by natural key (site, area, model, serial, position …).
	index []int
	// optional marks a *time.Time model field.
	optional bool
}

// spec describes one kind's CSV file.
type spec struct {
	kind    Kind
	model   reflect.Type
	columns []column
	byName  map[string]int
	// key lists the columns every row must give: the natural key.
	key []string
}

// column returns the named column.
func (sp *spec) column(name string) (column, bool) {
	i, ok := sp.byName[name]
	if !ok {
		return column{}, false
	}
	return sp.columns[i], true
}

// specOf builds the description of kind k from the store's models: model
// columns take their type from the struct field their JSON name (dotted for
// nested objects) names; reference columns are listed in refs.
func specOf(k Kind) (*spec, error) {
	word := cellWord
	switch k {
	case KindSites:
		return newSpec(k, store.Site{}, nil, []string{"name"},
			"name", "elevation_m", "time_zone", "ambient_min_c", "ambient_max_c", "parameters", "notes"), nil
	case KindAreas:
		return newSpec(k, store.Area{}, map[string]cellType{"site": word}, []string{"site", "name"},
			"site", "name", "environment.location", "environment.sun", "environment.ambient_min_c", "environment.ambient_max_c",
			"environment.water", "environment.dust", "environment.oil", "environment.condensation", "environment.salt_air",
			"environment.corrosion", "environment.hazardous_classified", "parameters", "notes"), nil
	case KindModels:
		return newSpec(k, store.DriveModel{}, nil, []string{"name"},
			"name", "maker", "voltage_class_v", "supply_phases", "normal_duty_current_a", "normal_duty_power_kw",
			"heavy_duty_current_a", "heavy_duty_power_kw", "normal_overload_fraction", "heavy_overload_fraction", "overload_s",
			"rated_ambient_c", "ambient_derate_fraction_per_c", "max_ambient_c", "altitude_rating_m",
			"altitude_derate_fraction_per_100m", "max_altitude_m", "default_carrier_khz", "carrier_derate",
			"single_phase_fraction", "losses_fraction", "bus_trip_v",
			"capacitor.rated_life_h", "capacitor.rated_temp_c", "capacitor.rating_includes_ripple", "capacitor.ripple_rise_c",
			"capacitor.activation_energy_ev", "fan.l10_h", "fan.ref_temp_c", "fan.halving_interval_c", "fan.runs",
			"enclosure.nema_type", "enclosure.ip_code", "conformal_coating", "drive_cost", "capacitor_kit_cost", "fan_kit_cost",
			"labour_cost_per_h", "drive_labour_h", "capacitor_labour_h", "fan_labour_h", "lead_time_days", "spares_on_hand",
			"parameters", "notes"), nil
	case KindPositions:
		return newSpec(k, store.Position{}, map[string]cellType{"site": word, "area": word}, []string{"site", "tag"},
			"site", "area", "tag", "description", "mounting",
			"cabinet.nema_type", "cabinet.ip_code", "cabinet.cooling", "cabinet.material", "cabinet.absorptance_fraction",
			"cabinet.height_m", "cabinet.width_m", "cabinet.depth_m", "cabinet.placement", "cabinet.top_covered",
			"cabinet.surface_area_m2", "cabinet.airflow_m3_per_h", "cabinet.cooling_capacity_w", "cabinet.set_point_c",
			"cabinet.other_losses_w", "supply_voltage_v", "supply_phases", "supply_frequency_hz", "single_phase_derate_set",
			"carrier_khz", "duty", "criticality", "notes"), nil
	case KindDrives:
		return newSpec(k, store.Drive{}, map[string]cellType{"model": word, "site": word, "stores_area": word}, []string{"serial"},
			"serial", "model", "site", "status", "stores_area", "manufactured_at", "last_energised_at", "notes"), nil
	case KindInstallations:
		return newSpec(k, store.Installation{}, map[string]cellType{"serial": word, "site": word, "position": word, "status_after": word},
			[]string{"serial", "site", "position", "installed_at"},
			"serial", "site", "position", "installed_at", "removed_at", "status_after", "notes"), nil
	case KindComponents:
		return newSpec(k, store.Component{}, map[string]cellType{"serial": word}, []string{"serial", "kind", "installed_at"},
			"serial", "kind", "installed_at", "removed_at", "part", "initial_capacitance_uf", "initial_esr_milliohm", "notes"), nil
	case KindEvents:
		return newSpec(k, store.Event{}, map[string]cellType{"serial": word, "site": word, "position": word}, []string{"at", "type"},
			"serial", "site", "position", "at", "type", "trip_cause", "state", "failure_mode", "failure_cause", "component", "notes"), nil
	case KindReadings:
		return nil, fmt.Errorf("%s: %w: readings are read through POST /api/v1/readings and GET /api/v1/drives/{id}/readings", k, ErrNotAvailable)
	}
	return nil, fmt.Errorf("%w %q", ErrUnknownKind, string(k))
}

// newSpec resolves every column against model. A name that is neither a
// reference nor a JSON field of model is a programming error and panics
// (the tests build every kind).
func newSpec(k Kind, model any, refs map[string]cellType, key []string, names ...string) *spec {
	sp := &spec{kind: k, model: reflect.TypeOf(model), byName: make(map[string]int, len(names)), key: key}
	for _, name := range names {
		c := column{name: name}
		if t, ok := refs[name]; ok {
			c.typ = t
		} else {
			idx, ft, ok := fieldByJSON(sp.model, strings.Split(name, "."))
			if !ok {
				panic(fmt.Sprintf("csvio: %s column %q names no field of %v", k, name, sp.model))
			}
			c.index = idx
			c.typ, c.optional = typeOf(ft, name)
		}
		sp.byName[name] = len(sp.columns)
		sp.columns = append(sp.columns, c)
	}
	return sp
}

// fieldByJSON finds the struct field whose JSON names are path.
func fieldByJSON(t reflect.Type, path []string) ([]int, reflect.Type, bool) {
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		if strings.Split(f.Tag.Get("json"), ",")[0] != path[0] {
			continue
		}
		if len(path) == 1 {
			return []int{i}, f.Type, true
		}
		if f.Type.Kind() != reflect.Struct {
			return nil, nil, false
		}
		rest, ft, ok := fieldByJSON(f.Type, path[1:])
		if !ok {
			return nil, nil, false
		}
		return append([]int{i}, rest...), ft, true
	}
	return nil, nil, false
}

var (
	timeType    = reflect.TypeOf(time.Time{})
	timePtrType = reflect.TypeOf(&time.Time{})
	carrierType = reflect.TypeOf([]store.CarrierPoint{})
	paramsType  = reflect.TypeOf(store.Parameters{})
)

// typeOf maps a model field's Go type to a cell type.
func typeOf(t reflect.Type, name string) (cellType, bool) {
	switch {
	case t == timeType:
		return cellTime, false
	case t == timePtrType:
		return cellTime, true
	case t == carrierType:
		return cellCarrier, false
	case t == paramsType:
		return cellParameters, false
	}
	switch t.Kind() {
	case reflect.String:
		if name == "notes" || name == "description" {
			return cellText, false
		}
		return cellWord, false
	case reflect.Float64:
		return cellNumber, false
	case reflect.Int:
		return cellInteger, false
	case reflect.Bool:
		return cellBool, false
	}
	panic(fmt.Sprintf("csvio: column %q has Go type %v, which has no cell form", name, t))
}

// parseCell reads one non-empty cell. The value's Go type follows the cell
// type: string, float64, int, bool, time.Time (UTC, microseconds) or
// []store.CarrierPoint.
func parseCell(t cellType, s string) (any, error) {
	switch t {
	case cellText, cellWord:
		return s, nil
	case cellNumber:
		v, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsNaN(v) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("must be a number such as 12.5, not %q", s)
		}
		return v, nil
	case cellInteger:
		v, err := strconv.Atoi(s)
		if err != nil {
			return nil, fmt.Errorf("must be a whole number, not %q", s)
		}
		return v, nil
	case cellBool:
		switch strings.ToLower(s) {
		case "true":
			return true, nil
		case "false":
			return false, nil
		}
		return nil, fmt.Errorf("must be true or false, not %q", s)
	case cellTime:
		v, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			return nil, fmt.Errorf("must be an RFC 3339 time such as 2024-05-06T07:00:00Z, not %q", s)
		}
		return v.UTC().Truncate(time.Microsecond), nil
	case cellCarrier:
		return parseCarrier(s)
	case cellParameters:
		var p store.Parameters
		if err := json.Unmarshal([]byte(s), &p); err != nil || p == nil {
			return nil, fmt.Errorf(`must be a JSON object such as {"data_quality":{"silent_after_s":7200}}, not %q`, s)
		}
		return p, nil
	}
	return nil, fmt.Errorf("unknown cell type %d", t)
}

// parseCarrier reads a carrier derating table: kHz:fraction pairs joined by
// semicolons ("6:0.90;8:0.80"), or "none" for an empty table.
func parseCarrier(s string) ([]store.CarrierPoint, error) {
	bad := fmt.Errorf("must be kHz:fraction pairs such as 6:0.90;8:0.80, or none, not %q", s)
	if strings.EqualFold(s, "none") {
		return []store.CarrierPoint{}, nil
	}
	out := []store.CarrierPoint{}
	for _, part := range strings.Split(s, ";") {
		part = strings.TrimSpace(part)
		if part == "" {
			continue
		}
		k, f, ok := strings.Cut(part, ":")
		if !ok {
			return nil, bad
		}
		khz, err1 := strconv.ParseFloat(strings.TrimSpace(k), 64)
		frac, err2 := strconv.ParseFloat(strings.TrimSpace(f), 64)
		if err1 != nil || err2 != nil || !finite(khz) || !finite(frac) {
			return nil, bad
		}
		out = append(out, store.CarrierPoint{CarrierKHz: khz, Fraction: frac})
	}
	if len(out) == 0 {
		return nil, bad
	}
	return out, nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// formatCell writes a value in its cell form; parseCell reads it back to the
// same value.
func formatCell(v any) string {
	switch x := v.(type) {
	case string:
		return x
	case float64:
		return strconv.FormatFloat(x, 'f', -1, 64)
	case int:
		return strconv.Itoa(x)
	case bool:
		return strconv.FormatBool(x)
	case time.Time:
		return x.UTC().Format(time.RFC3339Nano)
	case *time.Time:
		if x == nil {
			return ""
		}
		return x.UTC().Format(time.RFC3339Nano)
	case store.Parameters:
		// An empty object is written "{}", which reads back as a given,
		// empty object (it clears overrides on import); an empty cell would
		// read back as not given. Export leaves the cell empty instead.
		if x == nil {
			return ""
		}
		b, _ := json.Marshal(x)
		return string(b)
	case []store.CarrierPoint:
		if len(x) == 0 {
			return "none"
		}
		parts := make([]string, len(x))
		for i, p := range x {
			parts[i] = formatCell(p.CarrierKHz) + ":" + formatCell(p.Fraction)
		}
		return strings.Join(parts, ";")
	}
	return fmt.Sprint(v)
}

// field returns the model field of column c in the struct v points to.
func field(v any, c column) reflect.Value {
	return reflect.ValueOf(v).Elem().FieldByIndex(c.index)
}

// getModel reads column c of the model v points to as a cell value.
func getModel(v any, c column) any {
	f := field(v, c)
	switch c.typ {
	case cellText, cellWord:
		return f.String()
	case cellNumber:
		return f.Float()
	case cellInteger:
		return int(f.Int())
	case cellBool:
		return f.Bool()
	}
	return f.Interface()
}

// setModel writes a parsed cell value into column c of the model v points
// to.
func setModel(v any, c column, val any) {
	f := field(v, c)
	switch x := val.(type) {
	case string:
		f.SetString(x)
	case float64:
		f.SetFloat(x)
	case int:
		f.SetInt(int64(x))
	case bool:
		f.SetBool(x)
	case time.Time:
		if c.optional {
			f.Set(reflect.ValueOf(&x))
		} else {
			f.Set(reflect.ValueOf(x))
		}
	case []store.CarrierPoint:
		f.Set(reflect.ValueOf(x))
	case store.Parameters:
		f.Set(reflect.ValueOf(x))
	}
}
