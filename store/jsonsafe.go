package store

import (
	"encoding"
	"encoding/json"
	"math"
	"reflect"
	"strings"

	"kelvard/health"
)

// SafeJSON encodes v as encoding/json would, except that NaN and infinite
// floats become null. The models use NaN for "unknown" and +Inf for "never"
// (a part that does not age), which encoding/json refuses; reports keep
// those meanings as null.
func SafeJSON(v any) ([]byte, error) {
	return json.Marshal(Sanitize(v))
}

// Sanitize returns a tree of maps, slices and scalars equal to v's JSON
// form with every non-finite float replaced by nil. It follows json struct
// tags (names, "-", omitempty) and embedded structs; values that marshal
// themselves (time.Time, json.RawMessage) are kept as they are.
func Sanitize(v any) any {
	return sanitize(reflect.ValueOf(v))
}

var (
	marshalerType     = reflect.TypeFor[json.Marshaler]()
	textMarshalerType = reflect.TypeFor[encoding.TextMarshaler]()
)

func sanitize(v reflect.Value) any {
	if !v.IsValid() {
		return nil
	}
	if v.Kind() != reflect.Pointer && v.Kind() != reflect.Interface &&
		(v.Type().Implements(marshalerType) || v.Type().Implements(textMarshalerType)) {
		return v.Interface()
	}
	switch v.Kind() {
	case reflect.Pointer, reflect.Interface:
		if v.IsNil() {
			return nil
		}
		return sanitize(v.Elem())
	case reflect.Float32, reflect.Float64:
		f := v.Float()
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return nil
		}
		return f
	case reflect.Struct:
		out := map[string]any{}
		sanitizeStruct(v, out)
		return out
	case reflect.Slice:
		if v.IsNil() {
			return nil
		}
		if v.Type().Elem().Kind() == reflect.Uint8 {
			return v.Interface() // []byte encodes as base64
		}
		fallthrough
	case reflect.Array:
		out := make([]any, v.Len())
		for i := range out {
			out[i] = sanitize(v.Index(i))
		}
		return out
	case reflect.Map:
		if v.IsNil() {
			return nil
		}
		out := make(map[string]any, v.Len())
		iter := v.MapRange()
		for iter.Next() {
			k := iter.Key()
			var key string
			if k.Kind() == reflect.String {
				key = k.String()
			} else {
				b, _ := json.Marshal(k.Interface())
				key = strings.Trim(string(b), `"`)
			}
			out[key] = sanitize(iter.Value())
		}
		return out
	}
	return v.Interface()
}

func sanitizeStruct(v reflect.Value, out map[string]any) {
	t := v.Type()
	for i := 0; i < t.NumField(); i++ {
		sf := t.Field(i)
		tag := sf.Tag.Get("json")
		if tag == "-" {
			continue
		}
		name, opts, _ := strings.Cut(tag, ",")
		fv := v.Field(i)
		if sf.Anonymous && name == "" {
			ft := sf.Type
			if ft.Kind() == reflect.Pointer {
				if fv.IsNil() {
					continue
				}
				fv, ft = fv.Elem(), ft.Elem()
			}
			if ft.Kind() == reflect.Struct && !ft.Implements(marshalerType) {
				sanitizeStruct(fv, out)
				continue
			}
		}
		if !sf.IsExported() {
			continue
		}
		if name == "" {
			name = sf.Name
		}
		if strings.Contains(opts, "omitempty") && fv.IsZero() && fv.Kind() != reflect.Struct {
			continue
		}
		if strings.Contains(opts, "omitempty") && (fv.Kind() == reflect.Slice || fv.Kind() == reflect.Map) && fv.Len() == 0 {
			continue
		}
		out[name] = sanitize(fv)
	}
}

// finiteEvidence returns the evidence with non-finite numbers as nil, so it
// can be stored as JSON.
func finiteEvidence(ev []health.Evidence) []health.Evidence {
	out := make([]health.Evidence, len(ev))
	for i, e := range ev {
		e.Value, e.Limit = finiteAny(e.Value), finiteAny(e.Limit)
		out[i] = e
	}
	return out
}

func finiteAny(v any) any {
	switch f := v.(type) {
	case float64:
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return nil
		}
	case float32:
		if math.IsNaN(float64(f)) || math.IsInf(float64(f), 0) {
			return nil
		}
	}
	return v
}
