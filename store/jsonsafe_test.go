package store

import (
	"encoding/json"
	"math"
	"testing"
	"time"
)

type safeInner struct {
	V float64 `json:"v"`
}

type safeOuter struct {
	safeInner
	Name    string             `json:"name"`
	Skip    float64            `json:"-"`
	Empty   []float64          `json:"empty,omitempty"`
	Zero    float64            `json:"zero,omitempty"`
	F32     float32            `json:"f32"`
	List    []float64          `json:"list"`
	Arr     [2]float64         `json:"arr"`
	Map     map[string]float64 `json:"map"`
	Any     any                `json:"any"`
	Ptr     *float64           `json:"ptr"`
	At      time.Time          `json:"at"`
	Raw     json.RawMessage    `json:"raw"`
	Bytes   []byte             `json:"bytes"`
	NilList []float64          `json:"nil_list"`
	Untaged float64
}

// TestSafeJSON holds SafeJSON to encoding/json (the reference): the same
// bytes for finite values, and null wherever a float is NaN or infinite.
func TestSafeJSON(t *testing.T) {
	one := 1.5
	finite := safeOuter{safeInner: safeInner{V: 2}, Name: "a<b", Skip: 3, F32: 0.25, List: []float64{1, 2},
		Arr: [2]float64{3, 4}, Map: map[string]float64{"b": 1, "a": 2}, Any: 7.0, Ptr: &one,
		At: time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC), Raw: json.RawMessage(`{"x":1}`), Bytes: []byte("hi"), Untaged: 9}
	want, err := json.Marshal(finite)
	if err != nil {
		t.Fatal(err)
	}
	got, err := SafeJSON(finite)
	if err != nil {
		t.Fatal(err)
	}
	if string(got) != string(want) {
		t.Errorf("finite values:\n got %s\nwant %s", got, want)
	}

	nan, inf := math.NaN(), math.Inf(1)
	bad := finite
	bad.V, bad.F32, bad.List, bad.Arr = nan, float32(math.Inf(-1)), []float64{nan, 1}, [2]float64{inf, 2}
	bad.Map = map[string]float64{"a": inf}
	bad.Any, bad.Ptr, bad.Zero, bad.Untaged = nan, &inf, nan, inf
	// The expected form: encoding/json's output of the same value with
	// every non-finite float written as null by hand.
	type expect struct {
		V       *float64           `json:"v"`
		Name    string             `json:"name"`
		Zero    *float64           `json:"zero"`
		F32     *float32           `json:"f32"`
		List    []*float64         `json:"list"`
		Arr     [2]*float64        `json:"arr"`
		Map     map[string]*string `json:"map"`
		Any     any                `json:"any"`
		Ptr     *float64           `json:"ptr"`
		At      time.Time          `json:"at"`
		Raw     json.RawMessage    `json:"raw"`
		Bytes   []byte             `json:"bytes"`
		NilList []float64          `json:"nil_list"`
		Untaged *float64
	}
	one1, two := 1.0, 2.0
	want, err = json.Marshal(expect{Name: bad.Name, List: []*float64{nil, &one1}, Arr: [2]*float64{nil, &two},
		Map: map[string]*string{"a": nil}, At: bad.At, Raw: bad.Raw, Bytes: bad.Bytes})
	if err != nil {
		t.Fatal(err)
	}
	got, err = SafeJSON(bad)
	if err != nil {
		t.Fatal(err)
	}
	if string(got) != string(want) {
		t.Errorf("non-finite values:\n got %s\nwant %s", got, want)
	}
}
