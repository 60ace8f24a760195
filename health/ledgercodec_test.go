package health

import (
	"bytes"
	"encoding/json"
	"math"
	"math/rand/v2"
	"reflect"
	"slices"
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
	head, days, err := l.MarshalSplit()
	if err != nil {
		t.Fatal(err)
	}
	var split LifeLedger
	if err := split.UnmarshalSplit(head, days); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(split, l) {
		t.Errorf("split round trip lost a field:\n got %+v\nwant %+v", split, l)
	}
}

// TestLedgerCodecSplit: the two parts MarshalSplit writes decode to the
// ledger; the head alone carries no closed days and changes with the open
// day while the days part does not; a ledger stored whole before the split
// still decodes (days nil); and days both in the head and apart, or a
// corrupt days part, are refused.
func TestLedgerCodecSplit(t *testing.T) {
	l := LifeLedger{HasLast: true, LastAt: 9 * 86400, Damage: 0.1, Samples: 40,
		Days: []DayDamage{{Day: 3, Damage: 0.01, Seconds: 86400, AgingS: 86400, TempS: 1e6},
			{Day: 5, Damage: 0.02, Seconds: 7200, AgingS: 3600, TempS: 2e5}},
		HasCurrent: true, Current: DayDamage{Day: 9, Damage: 0.001, Seconds: 3600, AgingS: 1800, TempS: 5e4}}
	head, days, err := l.MarshalSplit()
	if err != nil {
		t.Fatal(err)
	}
	var back LifeLedger
	if err := back.UnmarshalSplit(head, days); err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(back, l) {
		t.Fatalf("split round trip:\n got %+v\nwant %+v", back, l)
	}
	var headOnly LifeLedger
	if err := headOnly.UnmarshalBinary(head); err != nil || len(headOnly.Days) != 0 || headOnly.Current != l.Current {
		t.Errorf("head alone: %+v, %v", headOnly, err)
	}
	later := l
	later.Current.Damage, later.Samples = 0.002, 41
	head2, days2, _ := later.MarshalSplit()
	if bytes.Equal(head, head2) || !bytes.Equal(days, days2) {
		t.Error("a reading within the open day changed the days part, or left the head as it was")
	}
	whole, _ := l.MarshalBinary()
	var old LifeLedger
	if err := old.UnmarshalSplit(whole, nil); err != nil || !reflect.DeepEqual(old, l) {
		t.Errorf("a ledger stored whole: %+v, %v", old, err)
	}
	if err := old.UnmarshalSplit(whole, days); err == nil {
		t.Error("closed days both in the head and apart decoded")
	}
	for _, bad := range [][]byte{{}, {2, 0}, days[:len(days)-3], append(days[:len(days):len(days)], 0)} {
		if err := old.UnmarshalSplit(head, bad); err == nil {
			t.Errorf("corrupt days %x… decoded", bad[:min(len(bad), 4)])
		}
	}
}

// TestDaysEncodeInPieces: closed days encoded in runs (as the store keeps
// them, in chunks) decode to the same days as encoded whole, and the whole
// encoding is the one MarshalSplit writes.
func TestDaysEncodeInPieces(t *testing.T) {
	var l LifeLedger
	for d := range int32(130) {
		l.Days = append(l.Days, DayDamage{Day: 20000 + d*3/2, Damage: 1e-3 * float64(d+1), Seconds: 86400 - float64(d%3)*60,
			AgingS: 80000 + float64(d), TempS: 3.3e6 + float64(d)})
	}
	_, whole, err := l.MarshalSplit()
	if err != nil {
		t.Fatal(err)
	}
	if string(whole) != string(EncodeDays(l.Days)) {
		t.Fatal("EncodeDays differs from the days MarshalSplit writes")
	}
	for _, cuts := range [][]int{{0, 130}, {0, 1, 130}, {0, 64, 65, 129, 130}, {0, 13, 50, 77, 130}} {
		var got []DayDamage
		for i := 1; i < len(cuts); i++ {
			days, err := DecodeDays(EncodeDays(l.Days[cuts[i-1]:cuts[i]]))
			if err != nil {
				t.Fatal(err)
			}
			got = append(got, days...)
		}
		if !reflect.DeepEqual(got, l.Days) {
			t.Errorf("cut at %v: days differ after a round trip", cuts)
		}
	}
	if days, err := DecodeDays(EncodeDays(nil)); err != nil || len(days) != 0 {
		t.Errorf("no days: %v, %v", days, err)
	}
	for _, bad := range [][]byte{nil, {2, 0}, {1, 2, 0}, append(EncodeDays(l.Days[:2]), 0)} {
		if _, err := DecodeDays(bad); err == nil {
			t.Errorf("DecodeDays(%v) took a bad encoding", bad)
		}
	}
}

// FuzzDecodeDays holds AppendDecodedDays to the checked reader the ledger
// codec decodes its own days with (ledgerReader.days): the same days, or
// an error from both, and never a panic.
func FuzzDecodeDays(f *testing.F) {
	var l LifeLedger
	for d := range int32(70) {
		l.Days = append(l.Days, DayDamage{Day: 20000 + d, Damage: 1e-3 * float64(d), Seconds: 86400 - float64(d%2)*600,
			AgingS: 86400 - float64(d%3)*60, TempS: 3e6})
	}
	f.Add(EncodeDays(l.Days))
	f.Add(EncodeDays(l.Days[:1]))
	f.Add(EncodeDays(nil))
	f.Add([]byte{daysCodecVersion, 4, 2, 3})
	f.Fuzz(func(t *testing.T, b []byte) {
		got, err := DecodeDays(b)
		var want []DayDamage
		var wantErr bool
		if len(b) == 0 || b[0] != daysCodecVersion {
			wantErr = true
		} else {
			r := &ledgerReader{b: b[1:]}
			want, _ = r.days()
			wantErr = r.err != nil || len(r.b) != 0
		}
		if (err != nil) != wantErr {
			t.Fatalf("error %v, the checked reader's %v", err, wantErr)
		}
		if err == nil && !slices.EqualFunc(got, want, sameDayBits) {
			t.Fatalf("days differ from the checked reader's")
		}
	})
}

// BenchmarkDecodeDays decodes 400 closed days, as a store loads each
// ledger of each drive it assesses.
func BenchmarkDecodeDays(b *testing.B) {
	var days []DayDamage
	for d := range int32(400) {
		days = append(days, DayDamage{Day: 20000 + d, Damage: 1e-3 * float64(d+1), Seconds: 86400, AgingS: 86400, TempS: 3.3e6 + float64(d)})
	}
	enc := EncodeDays(days)
	buf := make([]DayDamage, 0, 400)
	b.ReportAllocs()
	for b.Loop() {
		var err error
		if buf, err = AppendDecodedDays(buf[:0], enc); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*400), "ns/day")
}

// sameDayBits compares day buckets bit for bit (NaN equals NaN).
func sameDayBits(a, b DayDamage) bool {
	return a.Day == b.Day && math.Float64bits(a.Damage) == math.Float64bits(b.Damage) &&
		math.Float64bits(a.Seconds) == math.Float64bits(b.Seconds) && math.Float64bits(a.AgingS) == math.Float64bits(b.AgingS) &&
		math.Float64bits(a.TempS) == math.Float64bits(b.TempS)
}
