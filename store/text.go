package store

import (
	"reflect"
	"sort"
	"strings"
	"unicode/utf8"
)

// BadTextReason is the reason given for text PostgreSQL cannot store: it
// refuses a NUL character and bytes that are not UTF-8 in text columns and
// parameters (and would answer 500), so both stores refuse them up front,
// and so does the register CSV importer.
const BadTextReason = "is not UTF-8 text or holds a NUL character"

// GoodText reports whether s can be stored as text.
func GoodText(s string) bool {
	return utf8.ValidString(s) && !strings.ContainsRune(s, 0)
}

// textProblems lists every string in v (a struct, followed through
// pointers, nested structs, maps and slices, by JSON name) that is not
// good text, keys of maps included.
func textProblems(v any) []FieldError {
	var out []FieldError
	walkText(reflect.ValueOf(v), "", &out)
	sort.Slice(out, func(i, j int) bool { return out[i].Field < out[j].Field })
	return out
}

func walkText(v reflect.Value, path string, out *[]FieldError) {
	field := func(name string) string {
		if path == "" {
			return name
		}
		return path + "." + name
	}
	switch v.Kind() {
	case reflect.Pointer, reflect.Interface:
		if !v.IsNil() {
			walkText(v.Elem(), path, out)
		}
	case reflect.String:
		if !GoodText(v.String()) {
			*out = append(*out, FieldError{Field: orBody(path), Reason: BadTextReason})
		}
	case reflect.Struct:
		t := v.Type()
		for i := range t.NumField() {
			sf := t.Field(i)
			if !sf.IsExported() {
				continue
			}
			name, _, _ := strings.Cut(sf.Tag.Get("json"), ",")
			switch {
			case name == "-":
				continue
			case sf.Anonymous && name == "":
				walkText(v.Field(i), path, out)
				continue
			case name == "":
				name = sf.Name
			}
			walkText(v.Field(i), field(name), out)
		}
	case reflect.Map:
		iter := v.MapRange()
		for iter.Next() {
			k := iter.Key()
			key := ""
			if k.Kind() == reflect.String {
				key = k.String()
				if !GoodText(key) {
					*out = append(*out, FieldError{Field: orBody(path), Reason: "has a key that " + BadTextReason})
					continue
				}
			}
			walkText(iter.Value(), field(key), out)
		}
	case reflect.Slice, reflect.Array:
		if v.Type().Elem().Kind() == reflect.Uint8 {
			return // bytes, not text
		}
		for i := range v.Len() {
			walkText(v.Index(i), path, out)
		}
	}
}

func orBody(path string) string {
	if path == "" {
		return "body"
	}
	return path
}
