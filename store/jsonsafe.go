package store

import (
	"io"
	"math"

	jsonv2 "github.com/go-json-experiment/json"
	"github.com/go-json-experiment/json/jsontext"
	jsonv1 "github.com/go-json-experiment/json/v1"

	"kelvard/health"
)

// SafeJSON encodes v as encoding/json would, except that NaN and infinite
// floats become null. The models use NaN for "unknown" and +Inf for "never"
// (a part that does not age), which encoding/json refuses; reports keep
// those meanings as null.
//
// It runs the encoder of github.com/go-json-experiment/json with
// encoding/json's behaviour (DefaultOptionsV1) and one hook for floats, so
// a report is encoded in one pass: walking it into maps first cost a
// quarter of an incremental assessment.
func SafeJSON(v any) ([]byte, error) {
	return jsonv2.Marshal(v, safeJSONOptions)
}

// SafeJSONTo writes v to w as SafeJSON does, with no newline.
func SafeJSONTo(w io.Writer, v any) error {
	return jsonv2.MarshalWrite(w, v, safeJSONOptions)
}

var safeJSONOptions = jsonv2.JoinOptions(jsonv1.DefaultOptionsV1(), jsonv2.WithMarshalers(jsonv2.JoinMarshalers(
	jsonv2.MarshalToFunc(func(enc *jsontext.Encoder, f float64) error {
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return enc.WriteToken(jsontext.Null)
		}
		return jsonv2.SkipFunc
	}),
	jsonv2.MarshalToFunc(func(enc *jsontext.Encoder, f float32) error {
		if math.IsNaN(float64(f)) || math.IsInf(float64(f), 0) {
			return enc.WriteToken(jsontext.Null)
		}
		return jsonv2.SkipFunc
	}),
)))

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
