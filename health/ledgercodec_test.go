package health

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
)

// TestLedgerCodecRoundTrip: a ledger built from a year of varied readings,
// with gaps and a stored period, encodes and decodes bit for bit, and is
// much smaller than its JSON.
func TestLedgerCodecRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	spec := DefaultCapacitorSpec()
	spec.RippleRefCurrentA = 40
	p := DefaultCapacitorParams()
	var st CapacitorState
	at := int64(1_700_000_000)
	st, err := AddStoredCapacitorPeriod(spec, st, at-90*86400, at, 25)
	if err != nil {
		t.Fatal(err)
	}
	var samples []Sample
	for h := 1; h <= 8760; h++ {
		step := int64(3600)
		if rng.IntN(200) == 0 {
			step = 10 * 3600 // a gap
		}
		at += step
		samples = append(samples, Sample{At: at, InternalAirC: 35 + 10*math.Sin(float64(h)/24) + rng.NormFloat64(),
			AmbientC: math.NaN(), CurrentA: 30 * rng.Float64(), FrequencyHz: 40, HeatsinkC: math.NaN()})
	}
	st, _, err = AccumulateCapacitor(spec, p, st, samples, LifeAirInputs{})
	if err != nil {
		t.Fatal(err)
	}
	b, err := st.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	var back CapacitorState
	if err := back.UnmarshalBinary(b); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, st) {
		t.Fatalf("round trip differs:\n%+v\n%+v", back.LifeLedger.Current, st.LifeLedger.Current)
	}
	j, _ := json.Marshal(st)
	if len(b)*4 > len(j) {
		t.Errorf("binary %d bytes against JSON %d: want at most a quarter", len(b), len(j))
	}
	t.Logf("%d days: binary %d bytes, JSON %d bytes", len(st.Days), len(b), len(j))
	for _, bad := range [][]byte{nil, {2}, b[:len(b)-3], append(b[:len(b):len(b)], 0)} {
		var l LifeLedger
		if err := l.UnmarshalBinary(bad); err == nil {
			t.Errorf("corrupt encoding %x… decoded", bad[:min(len(bad), 4)])
		}
	}
}

// FuzzLedgerCodec: decoding any bytes never panics, and whatever decodes
// encodes to bytes that decode and encode to themselves again (compared as
// bytes: a NaN never equals itself).
func FuzzLedgerCodec(f *testing.F) {
	l := LifeLedger{HasLast: true, LastAt: 5, Damage: 0.1, Days: []DayDamage{{Day: 3, Damage: 0.01, Seconds: 86400, AgingS: 86400, TempS: 1e6}},
		HasCurrent: true, Current: DayDamage{Day: 4, Damage: 0.001, Seconds: 3600, AgingS: 1800, TempS: 5e4}}
	b, _ := l.MarshalBinary()
	f.Add(b)
	f.Add([]byte{1, 0})
	f.Fuzz(func(t *testing.T, data []byte) {
		var l LifeLedger
		if err := l.UnmarshalBinary(data); err != nil {
			return
		}
		again, err := l.MarshalBinary()
		if err != nil {
			t.Fatal(err)
		}
		var l2 LifeLedger
		if err := l2.UnmarshalBinary(again); err != nil {
			t.Fatalf("re-encoding does not decode: %v", err)
		}
		third, _ := l2.MarshalBinary()
		if !bytes.Equal(again, third) {
			t.Fatal("re-encoding is not stable")
		}
	})
}

// TestLedgerCodecCarriesEveryField fills every field of a ledger, its day
// buckets and its counts with a distinct value by reflection, so a field
// added to LifeLedger, DayDamage or AirSourceCounts without a place in the
// codec fails here rather than being dropped silently on the next save.
func TestLedgerCodecCarriesEveryField(t *testing.T) {
	next := 0
	var fill func(v reflect.Value)
	fill = func(v reflect.Value) {
		switch v.Kind() {
		case reflect.Struct:
			for i := range v.NumField() {
				fill(v.Field(i))
			}
		case reflect.Bool:
			v.SetBool(true)
		case reflect.Int32, reflect.Int64:
			next++
			v.SetInt(int64(next))
		case reflect.Float64:
			next++
			v.SetFloat(float64(next) + 0.25)
		case reflect.Slice:
			v.Set(reflect.MakeSlice(v.Type(), 2, 2))
			for i := range 2 {
				fill(v.Index(i))
			}
		default:
			t.Fatalf("ledger field of kind %s: teach this test and the codec about it", v.Kind())
		}
	}
	var l LifeLedger
	fill(reflect.ValueOf(&l).Elem())
	b, err := l.MarshalBinary()
	if err != nil {
		t.Fatal(err)
	}
	var back LifeLedger
	if err := back.UnmarshalBinary(b); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, l) {
		t.Errorf("round trip lost a field:\n got %+v\nwant %+v", back, l)
	}
}
