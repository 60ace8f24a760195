package store

import (
	"errors"
	"fmt"
	"reflect"
	"testing"

	"github.com/jackc/pgx/v5/pgconn"
)

func TestTextProblemsWalksEverything(t *testing.T) {
	t.Parallel()
	type inner struct {
		Tag  string         `json:"tag"`
		Tags []string       `json:"tags"`
		More map[string]any `json:"more"`
	}
	type outer struct {
		Name   string  `json:"name"`
		Skip   string  `json:"-"`
		Plain  string  // no tag: its Go name
		Inner  inner   `json:"inner"`
		Ptr    *inner  `json:"ptr,omitempty"`
		Bytes  []byte  `json:"bytes"`
		hidden string  // unexported: not walked
		Any    any     `json:"any"`
		Num    float64 `json:"num"`
	}
	bad := "x\x00y"
	v := outer{Name: "fine", Skip: bad, Plain: bad, hidden: bad, Bytes: []byte{0, 0xff},
		Inner: inner{Tag: "\xff", Tags: []string{"ok", bad}, More: map[string]any{"k": bad, bad: 1, "n": map[string]any{"deep": bad}}},
		Ptr:   &inner{Tag: bad}, Any: bad}
	var got []string
	for _, fe := range textProblems(&v) {
		got = append(got, fe.Field+": "+fe.Reason)
	}
	want := []string{
		"Plain: " + BadTextReason,
		"any: " + BadTextReason,
		"inner.more: has a key that " + BadTextReason,
		"inner.more.k: " + BadTextReason,
		"inner.more.n.deep: " + BadTextReason,
		"inner.tag: " + BadTextReason,
		"inner.tags: " + BadTextReason,
		"ptr.tag: " + BadTextReason,
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("textProblems:\n%q\nwant\n%q", got, want)
	}
	if fe := textProblems(outer{Name: "Pump hall", Inner: inner{More: map[string]any{"a": "é"}}}); len(fe) != 0 {
		t.Errorf("good text refused: %v", fe)
	}
}

// TestTranslateBadText: should bad text reach PostgreSQL anyway, its
// refusal is a validation error, not an internal one.
func TestTranslateBadText(t *testing.T) {
	t.Parallel()
	for _, code := range []string{"22021", "22P05"} {
		err := translate(fmt.Errorf("query: %w", &pgconn.PgError{Code: code, Message: "invalid byte sequence"}))
		var ve *ValidationError
		if !errors.As(err, &ve) || len(ve.Fields) != 1 || ve.Fields[0].Field != "text" {
			t.Errorf("code %s: %v", code, err)
		}
	}
}
