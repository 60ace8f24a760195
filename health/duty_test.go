package health

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

// dutySample is a running hourly sample with the given mean and peak current.
func dutySample(i int, currentA, peakA float64) Sample {
	nan := math.NaN()
	return Sample{At: int64(1_700_000_000 + 3600*i), CurrentA: currentA, PeakCurrentA: peakA, FrequencyHz: 50,
		InternalAirC: nan, AmbientC: nan, HeatsinkC: nan, BusV: nan, BusRippleV: nan, CapacitanceUF: nan, ESRMilliohm: nan}
}

// dutyHyndmanFan4 is an independent implementation of the Hyndman-Fan
// definition 4 sample quantile (linear interpolation of the empirical CDF,
// F(x_(k)) = k/n), from "Sample quantiles in statistical packages" (The
// American Statistician 50(4), 1996): Q(p) = x_(k) + (np - k)(x_(k+1) - x_(k))
// with k = floor(np), x_(0) read as x_(1) and x_(n+1) as x_(n).
func dutyHyndmanFan4(sorted []float64, p float64) float64 {
	n := len(sorted)
	np := float64(n) * p
	k := int(math.Floor(np))
	at := func(i int) float64 { return sorted[min(max(i, 1), n)-1] }
	return at(k) + (np-float64(k))*(at(k+1)-at(k))
}

func TestRunningCurrentQuantile(t *testing.T) {
	var s []Sample
	for i := 1; i <= 100; i++ {
		s = append(s, dutySample(i, float64(i), math.NaN()))
	}
	// Stopped samples (frequency 0) and bad currents are left out.
	stopped := dutySample(200, 500, math.NaN())
	stopped.FrequencyHz = 0
	negative := dutySample(201, -40, math.NaN())
	s = append(s, stopped, negative)
	// Hyndman-Fan definition 4: for x = 1..100, Q(0.95) = x_(95) = 95; Q(0.5) = 50.
	for _, c := range []struct{ p, want float64 }{{0.95, 95}, {0.5, 50}, {1, 100}, {0, 1}, {0.955, 95.5}} {
		got, n := RunningCurrentQuantile(s, c.p)
		if n != 100 || !dutyNear(got, c.want, 1e-9) {
			t.Errorf("RunningCurrentQuantile(p=%v) = %v over %d samples, want %v over 100", c.p, got, n, c.want)
		}
	}
	// With no frequency logged, current above zero counts as running (Sample.Running).
	noFreq := dutySample(0, 30, math.NaN())
	noFreq.FrequencyHz = math.NaN()
	if got, n := RunningCurrentQuantile([]Sample{noFreq}, 0.95); n != 1 || got != 30 {
		t.Errorf("frequency not logged: %v over %d", got, n)
	}
	if got, n := RunningCurrentQuantile([]Sample{stopped}, 0.95); n != 0 || !math.IsNaN(got) {
		t.Errorf("no running sample: %v over %d, want NaN over 0", got, n)
	}
}

func TestRunningCurrentQuantileAgainstDefinition(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for range 500 {
		n := 1 + rng.IntN(300)
		s := make([]Sample, n)
		x := make([]float64, n)
		for i := range s {
			x[i] = rng.Float64() * 200
			s[i] = dutySample(i, x[i], math.NaN())
		}
		slices.Sort(x)
		p := rng.Float64()
		got, _ := RunningCurrentQuantile(s, p)
		if want := dutyHyndmanFan4(x, p); !dutyNear(got, want, 1e-9) {
			t.Fatalf("n=%d p=%v: gonum LinInterp %v, Hyndman-Fan 4 %v", n, p, got, want)
		}
	}
}

func TestUtilisationOf(t *testing.T) {
	var s []Sample
	for i := 1; i <= 100; i++ {
		s = append(s, dutySample(i, float64(i), math.NaN()))
	}
	u, err := UtilisationOf(s, 50, 0.95)
	if err != nil || !u.Defined || !dutyNear(u.Fraction, 95.0/50, 1e-12) || u.RunningSamples != 100 {
		t.Errorf("UtilisationOf = %+v, %v; want 1.9 over 100 samples", u, err)
	}
	if u, _ := UtilisationOf(s, 0, 0.95); u.Defined {
		t.Errorf("zero allowed current gave a defined utilisation %+v", u)
	}
	if u, _ := UtilisationOf(nil, 50, 0.95); u.Defined {
		t.Errorf("no samples gave a defined utilisation %+v", u)
	}
	if _, err := UtilisationOf(s, 50, 1.5); err == nil {
		t.Error("percentile 1.5 gave no error")
	}
}

func TestUtilisationNeverNegative(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for i := range 2000 {
		n := rng.IntN(50)
		s := make([]Sample, n)
		for j := range s {
			s[j] = dutySample(j, -100+rng.Float64()*400, math.NaN())
			if rng.IntN(5) == 0 {
				s[j].FrequencyHz = 0
			}
			if rng.IntN(7) == 0 {
				s[j].CurrentA = math.NaN()
			}
		}
		u, err := UtilisationOf(s, rng.Float64()*300, rng.Float64())
		if err != nil {
			t.Fatal(err)
		}
		if u.Defined && !(u.Fraction >= 0) {
			t.Fatalf("case %d: utilisation %v is negative or NaN while defined", i, u.Fraction)
		}
	}
}

func TestOverloadPeaksOf(t *testing.T) {
	normal := OverloadAllowance{Fraction: 1.10, DurationS: 60, EveryS: 600}
	heavy := OverloadAllowance{Fraction: 1.50, DurationS: 60, EveryS: 600}
	// Common practice: normal duty 110 %, heavy duty 150 % of the allowed current.
	// Hourly means of 80 A hide a 60 s peak; only the peak field shows it.
	s := []Sample{
		dutySample(0, 80, 105), dutySample(1, 80, 111), dutySample(2, 80, math.NaN()), dutySample(3, 80, 130),
	}
	cases := []struct {
		name    string
		allowed float64
		ol      OverloadAllowance
		over    int
		worst   float64
	}{
		{"normal duty, 100 A allowed, limit 110 A", 100, normal, 2, 130},
		{"heavy duty, 100 A allowed, limit 150 A", 100, heavy, 0, math.NaN()},
		{"heavy duty, 80 A allowed, limit 120 A", 80, heavy, 1, 130},
		{"out of rating", 0, normal, 0, math.NaN()},
	}
	for _, c := range cases {
		got := OverloadPeaksOf(s, c.allowed, c.ol)
		if got.Over != c.over || !(got.WorstA == c.worst || math.IsNaN(got.WorstA) && math.IsNaN(c.worst)) {
			t.Errorf("%s: %+v, want %d over, worst %v", c.name, got, c.over, c.worst)
		}
		if c.allowed > 0 && got.Intervals != 3 {
			t.Errorf("%s: %d intervals with a peak, want 3", c.name, got.Intervals)
		}
	}
}

func TestCountTrips(t *testing.T) {
	ev := []Event{
		{At: 100, Type: EventTrip, Cause: TripOverload},
		{At: 200, Type: EventTrip, Cause: TripOverload},
		{At: 200, Type: EventTrip, Cause: TripOverVoltage},
		{At: 250, Type: EventPowerUp},
		{At: 300, Type: EventTrip, Cause: TripOverload},
	}
	cases := []struct {
		from, to int64
		want     int
	}{{0, 1000, 3}, {100, 300, 2}, {99, 200, 2}, {300, 1000, 0}}
	for _, c := range cases {
		if got := CountTrips(ev, TripOverload, c.from, c.to); got != c.want {
			t.Errorf("CountTrips(%d, %d] = %d, want %d", c.from, c.to, got, c.want)
		}
	}
}

// dutySteady returns n running samples at a constant current.
func dutySteady(n int, currentA float64) []Sample {
	s := make([]Sample, n)
	for i := range s {
		s[i] = dutySample(i, currentA, math.NaN())
	}
	return s
}

func TestAssessDuty(t *testing.T) {
	r := dutyTestRatings() // 100 A normal duty, default carrier 4 kHz, 0.80 at 8 kHz
	p := DefaultDutyParams()
	const at = 1_700_000_000 + 3600*100
	cool := Application{Duty: DutyNormal, AmbientC: 35, AltitudeM: 100}
	carrier8 := cool
	carrier8.CarrierKHz = 8
	trips := func(n int) []Event {
		var ev []Event
		for i := range n {
			ev = append(ev, Event{At: at - int64(i+1)*86400, Type: EventTrip, Cause: TripOverload})
		}
		return append(ev, Event{At: at - 40*86400, Type: EventTrip, Cause: TripOverload}) // outside 30 days
	}
	peaks := dutySteady(48, 60)
	peaks[10].PeakCurrentA = 125
	cases := []struct {
		name string
		app  Application
		s    []Sample
		ev   []Event
		want []string
	}{
		{"clean", cool, dutySteady(48, 70), nil, nil},
		// Utilisation 0.95 > 0.9: advice; 1.05 > 1.0: major (kelvard defaults).
		{"utilisation advice", cool, dutySteady(48, 95), nil, []string{"derating.utilisation_high:advice"}},
		{"utilisation major", cool, dutySteady(48, 105), nil, []string{"derating.utilisation_high:major"}},
		{"too few samples", cool, dutySteady(10, 105), nil, nil},
		// 8 kHz derates to 80 A (model table, common practice); 85 A is 106 % of
		// that but only 85 % at the default carrier: the carrier alone is reported.
		{"carrier pushes over", carrier8, dutySteady(48, 85), nil, []string{"derating.carrier:major"}},
		// 110 A is over even at the default carrier: both.
		{"carrier and over anyway", carrier8, dutySteady(48, 110), nil, []string{"derating.carrier:major", "derating.utilisation_high:major"}},
		// 70 A at 8 kHz is 87.5 %: under the advice threshold, nothing.
		{"carrier with headroom", carrier8, dutySteady(48, 70), nil, nil},
		// Normal duty allows 110 A for 60 s (common practice); a 125 A peak exceeds it.
		{"overload peak", cool, peaks, nil, []string{"derating.overload_peak:major"}},
		{"one overload trip", cool, dutySteady(48, 70), trips(1), []string{"derating.overload_trips:minor"}},
		{"three overload trips", cool, dutySteady(48, 70), trips(3), []string{"derating.overload_trips:major"}},
	}
	for _, c := range cases {
		a, err := AssessDuty(DutyInput{Ratings: r, Application: c.app, DesignAmbientMaxC: 35, Samples: c.s, Events: c.ev, At: at}, p)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if got := dutyRuleIDs(a.Findings); !slices.Equal(got, c.want) {
			t.Errorf("%s: findings %v, want %v", c.name, got, c.want)
		}
		for _, f := range a.Findings {
			dutyCheckFinding(t, f)
		}
	}
	bad := p
	bad.Percentile = 0
	if _, err := AssessDuty(DutyInput{Ratings: r, Application: cool}, bad); err == nil {
		t.Error("percentile 0 gave no error")
	}
}

func BenchmarkRunningCurrentQuantile(b *testing.B) {
	rng := rand.New(rand.NewPCG(7, 8))
	s := make([]Sample, 24*30)
	for i := range s {
		s[i] = dutySample(i, 40+rng.Float64()*40, math.NaN())
	}
	for b.Loop() {
		RunningCurrentQuantile(s, 0.95)
	}
}

func BenchmarkOverloadPeaksOf(b *testing.B) {
	rng := rand.New(rand.NewPCG(9, 10))
	s := make([]Sample, 24*30)
	for i := range s {
		s[i] = dutySample(i, 60, 60+rng.Float64()*60)
	}
	ol := OverloadAllowance{Fraction: 1.1, DurationS: 60, EveryS: 600}
	for b.Loop() {
		OverloadPeaksOf(s, 100, ol)
	}
}
