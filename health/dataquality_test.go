package health

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// dqSeries returns n samples every stepS seconds with ambient(i) as the
// ambient and a running drive at about 50 A.
func dqSeries(n int, stepS int64, ambient func(i int) float64) []Sample {
	s := make([]Sample, n)
	for i := range s {
		s[i] = dutySample(0, 50+0.1*float64(i%13), math.NaN())
		s[i].At = 1_700_000_000 + int64(i)*stepS
		s[i].AmbientC = ambient(i)
	}
	return s
}

func TestCheckSilent(t *testing.T) {
	p := DefaultDataQualityParams() // 24 h, major from 7 days (kelvard defaults)
	const last = 1_700_000_000
	cases := []struct {
		name string
		seen bool
		ageH int64
		want []string
	}{
		{"23 h", true, 23, nil},
		{"exactly 24 h", true, 24, nil},
		{"25 h", true, 25, []string{"data_quality.silent:minor"}},
		{"8 days", true, 8 * 24, []string{"data_quality.silent:major"}},
		{"never", false, 0, []string{"data_quality.silent:minor"}},
	}
	for _, c := range cases {
		fs := CheckSilent(last, c.seen, last+c.ageH*3600, p)
		if got := dutyRuleIDs(fs); !slices.Equal(got, c.want) {
			t.Errorf("%s: %v, want %v", c.name, got, c.want)
		}
		for _, f := range fs {
			dutyCheckFinding(t, f)
		}
	}
}

func TestStuckRuns(t *testing.T) {
	p := DefaultDataQualityParams() // 24 identical readings over at least 24 h
	wobble := func(i int) float64 { return 20 + 0.1*float64(i%7) }
	cases := []struct {
		name  string
		s     []Sample
		field SampleField
		count int
	}{
		{"live sensor", dqSeries(100, 3600, wobble), "", 0},
		{"30 h frozen", dqSeries(100, 3600, func(i int) float64 {
			if i >= 40 && i < 70 {
				return 23.5
			}
			return wobble(i)
		}), FieldAmbient, 30},
		{"20 h frozen", dqSeries(100, 3600, func(i int) float64 {
			if i >= 40 && i < 60 {
				return 23.5
			}
			return wobble(i)
		}), "", 0},
		// 30 identical readings a minute apart span half an hour: a whole-degree
		// sensor in a steady room, not a frozen one.
		{"30 min at 1-minute readings", dqSeries(30, 60, func(int) float64 { return 22 }), "", 0},
	}
	for _, c := range cases {
		got := StuckRuns(c.s, p)
		switch {
		case c.count == 0 && len(got) != 0:
			t.Errorf("%s: %+v, want none", c.name, got)
		case c.count > 0 && (len(got) != 1 || got[0].Field != c.field || got[0].Count != c.count):
			t.Errorf("%s: %+v, want %s over %d", c.name, got, c.field, c.count)
		}
	}
	// A stopped drive logs zero current for two days honestly; a NaN gap
	// does not break a frozen run.
	s := dqSeries(48, 3600, wobble)
	for i := range s {
		s[i].CurrentA, s[i].FrequencyHz = 0, 0
	}
	if got := StuckRuns(s, p); len(got) != 0 {
		t.Errorf("stopped drive: %+v", got)
	}
	s = dqSeries(48, 3600, func(int) float64 { return 21 })
	s[10].AmbientC = math.NaN()
	if got := StuckRuns(s, p); len(got) != 1 || got[0].Field != FieldAmbient || got[0].Count != 47 {
		t.Errorf("frozen ambient with a gap: %+v", got)
	}
	// A current frozen at one value while running is stuck too.
	for i := range s {
		s[i].CurrentA = 50
	}
	if got := StuckRuns(s, p); len(got) != 2 || got[1].Field != FieldCurrent || got[1].Count != 48 {
		t.Errorf("frozen current: %+v", got)
	}
}

func TestTemperatureJumps(t *testing.T) {
	p := DefaultDataQualityParams() // air 0.5 K/min, heatsink 3 K/min (from memory)
	cases := []struct {
		name  string
		stepS int64
		f     func(i int) float64
		count int
	}{
		// 30 K in an hour is exactly 0.5 K/min: not faster than the limit.
		{"30 K in an hour", 3600, func(i int) float64 { return 20 + 30*float64(min(i, 1)) }, 0},
		{"31 K in an hour", 3600, func(i int) float64 { return 20 + 31*float64(min(i, 1)) }, 1},
		// A one-reading spike counts up and back down.
		{"spike", 600, func(i int) float64 {
			if i == 5 {
				return 85
			}
			return 21
		}, 2},
		{"smooth day", 3600, func(i int) float64 { return 20 + 8*math.Sin(float64(i)*2*math.Pi/24) }, 0},
	}
	for _, c := range cases {
		got := TemperatureJumps(dqSeries(24, c.stepS, c.f), p)
		n := 0
		for _, j := range got {
			if j.Field == FieldAmbient {
				n = j.Count
			}
		}
		if n != c.count {
			t.Errorf("%s: %d jumps (%+v), want %d", c.name, n, got, c.count)
		}
	}
	// Heatsink: 30 K in 5 minutes (6 K/min) is a jump; 10 K (2 K/min) is not.
	hs := dqSeries(3, 300, func(int) float64 { return 20 })
	hs[0].HeatsinkC, hs[1].HeatsinkC, hs[2].HeatsinkC = 40, 50, 80
	got := TemperatureJumps(hs, p)
	if len(got) != 1 || got[0].Field != FieldHeatsink || got[0].Count != 1 || !dutyNear(got[0].WorstKPerMin, 6, 1e-12) {
		t.Errorf("heatsink: %+v", got)
	}
}

// dqClimate is a warm-coast ambient in °C over 30 days of hourly readings:
// 24 °C mean, ±6 K daily swing and a little noise.
func dqClimate(rng *rand.Rand) func(i int) float64 {
	return func(i int) float64 { return 24 + 6*math.Sin(float64(i)*2*math.Pi/24) + rng.NormFloat64() }
}

func TestFahrenheitSuspected(t *testing.T) {
	p := DefaultDataQualityParams()
	rng := rand.New(rand.NewPCG(17, 18))
	climate := dqClimate(rng)
	asF := func(i int) float64 { return climate(i)*1.8 + 32 } // the definition of the Fahrenheit scale
	nan := math.NaN()
	cases := []struct {
		name       string
		f          func(int) float64
		min, max   float64
		suspected  bool
		wantMedian float64
	}{
		{"°C, design 5 to 38", climate, 5, 38, false, 24},
		{"°F, design 5 to 38", asF, 5, 38, true, 24*1.8 + 32},
		// A hot room a few kelvin above its registered design maximum is not °F.
		{"real air 4 K above design", func(i int) float64 { return climate(i) + 16 }, 5, 36, false, 40},
		// Design unknown: 75 °F logged as 75 °C is still above any rated air (60 °C bound).
		{"°F, design unknown", asF, nan, nan, true, 24*1.8 + 32},
		{"°C, design unknown", climate, nan, nan, false, 24},
	}
	for _, c := range cases {
		got := FahrenheitSuspected(dqSeries(24*30, 3600, c.f), c.min, c.max, p)
		if got.Suspected != c.suspected || !dutyNear(got.MedianC, c.wantMedian, 1) {
			t.Errorf("%s: %+v, want suspected %v, median about %v", c.name, got, c.suspected, c.wantMedian)
		}
		if got.Suspected && got.Reason == "" {
			t.Errorf("%s: suspected without a reason", c.name)
		}
	}
	if got := FahrenheitSuspected(dqSeries(10, 3600, asF), 5, 38, p); got.Suspected {
		t.Errorf("10 readings were judged: %+v", got)
	}
}

func TestAssessDataQuality(t *testing.T) {
	p := DefaultDataQualityParams()
	rng := rand.New(rand.NewPCG(19, 20))
	climate := dqClimate(rng)
	clean := dqSeries(24*30, 3600, climate)
	for i := range clean {
		clean[i].CurrentA = 50 + 10*rng.Float64()
	}
	end := clean[len(clean)-1].At
	frozen := slices.Clone(clean)
	for i := 100; i < 150; i++ {
		frozen[i].AmbientC = 25
	}
	fahrenheit := slices.Clone(clean)
	for i := range fahrenheit {
		fahrenheit[i].AmbientC = fahrenheit[i].AmbientC*1.8 + 32
	}
	spiky := slices.Clone(clean)
	spiky[200].AmbientC = 120
	cases := []struct {
		name string
		s    []Sample
		last int64
		at   int64
		want []string
	}{
		{"clean", clean, 0, end + 3600, nil},
		{"silent for 3 days", clean, 0, end + 3*86400, []string{"data_quality.silent:minor"}},
		{"silent with a later reading outside the window", clean, end + 2*86400, end + 2*86400 + 3600, nil},
		{"never seen", nil, 0, end, []string{"data_quality.silent:minor"}},
		{"stuck", frozen, 0, end + 3600, []string{"data_quality.stuck_sensor:minor"}},
		{"°F", fahrenheit, 0, end + 3600, []string{"data_quality.fahrenheit_suspected:major"}},
		{"spike", spiky, 0, end + 3600, []string{"data_quality.implausible_jump:minor"}},
	}
	for _, c := range cases {
		fs, err := AssessDataQuality(DataQualityInput{Samples: c.s, LastReadingAt: c.last, At: c.at, DesignAmbientMinC: 5, DesignAmbientMaxC: 38}, p)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if got := dutyRuleIDs(fs); !slices.Equal(got, c.want) {
			t.Errorf("%s: %v, want %v", c.name, got, c.want)
		}
		for _, f := range fs {
			dutyCheckFinding(t, f)
			if _, err := json.Marshal(f); err != nil {
				t.Errorf("%s: finding does not encode as JSON: %v", c.name, err)
			}
		}
	}
	// With the design range unknown the °F evidence still encodes (NaN becomes null).
	fs, err := AssessDataQuality(DataQualityInput{Samples: fahrenheit, At: end, DesignAmbientMinC: math.NaN(), DesignAmbientMaxC: math.NaN()}, p)
	if err != nil || len(fs) != 1 {
		t.Fatalf("°F, design unknown: %v, %v", dutyRuleIDs(fs), err)
	}
	if _, err := json.Marshal(fs); err != nil {
		t.Errorf("°F finding with unknown design does not encode: %v", err)
	}
	bad := p
	bad.StuckFields = []SampleField{"humidity"}
	if _, err := AssessDataQuality(DataQualityInput{At: end}, bad); err == nil {
		t.Error("an unknown stuck field gave no error")
	}
}

func TestSampleFieldOf(t *testing.T) {
	s := Sample{At: 1, InternalAirC: 1, AmbientC: 2, HeatsinkC: 3, CurrentA: 4, PeakCurrentA: 5, FrequencyHz: 6, BusV: 7, BusRippleV: 8, CapacitanceUF: 9, ESRMilliohm: 10}
	for i, f := range SampleFields() {
		if got := f.Of(s); got != float64(i+1) {
			t.Errorf("%s.Of = %v, want %v", f, got, i+1)
		}
	}
	if !math.IsNaN(SampleField("humidity").Of(s)) {
		t.Error("an unknown field gave a value")
	}
}

func BenchmarkAssessDataQuality(b *testing.B) {
	rng := rand.New(rand.NewPCG(21, 22))
	s := dqSeries(24*30, 3600, dqClimate(rng))
	p := DefaultDataQualityParams()
	in := DataQualityInput{Samples: s, At: s[len(s)-1].At, DesignAmbientMinC: 5, DesignAmbientMaxC: 38}
	for b.Loop() {
		if _, err := AssessDataQuality(in, p); err != nil {
			b.Fatal(err)
		}
	}
}
