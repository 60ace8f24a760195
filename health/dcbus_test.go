package health

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestExpectedBusV(t *testing.T) {
	p := DefaultDCBusParams()
	// Power electronics handbooks: √2 × 480 V = 678.8 V ≈ 679 V at light
	// load; 3√2/π × 480 V = 648.2 V (≈ 1.35 × 480 = 648 V) under load.
	cases := []struct {
		name         string
		lineV, x     float64
		want, within float64
	}{
		{"480 V, stopped", 480, 0, 679, 0.5},
		{"480 V, light load", 480, 0.1, 678.82, 0.01},
		{"480 V, full load", 480, 1, 648, 0.5},
		{"480 V, overload", 480, 1.4, 648.2, 0.05},
		{"400 V, light load", 400, 0.05, 565.7, 0.05},
		// Halfway between 0.1 and 1.0 the line is halfway: (678.82 + 648.23) / 2.
		{"480 V, midway", 480, 0.55, (math.Sqrt2 + 3*math.Sqrt2/math.Pi) / 2 * 480, 1e-9},
	}
	for _, c := range cases {
		if got := ExpectedBusV(c.lineV, c.x, p); math.Abs(got-c.want) > c.within {
			t.Errorf("%s: ExpectedBusV = %v, want %v ± %v", c.name, got, c.want, c.within)
		}
	}
	if !dutyNear(SixPulseMeanFactor, 1.35, 0.001) {
		t.Errorf("SixPulseMeanFactor = %v, want about 1.35", SixPulseMeanFactor)
	}
}

// dcSeries returns hourly samples over days; bus(i, x) and ripple(i, x)
// give the bus and ripple at sample i and load x; load(i) the load fraction
// of a 100 A drive.
func dcSeries(days int, load func(i int) float64, bus, ripple func(i int, x float64) float64) []Sample {
	n := days * 24
	s := make([]Sample, n)
	for i := range s {
		x := load(i)
		s[i] = dutySample(i, 100*x, math.NaN())
		if x == 0 {
			s[i].FrequencyHz = 0
		}
		s[i].BusV = bus(i, x)
		s[i].BusRippleV = ripple(i, x)
	}
	return s
}

func TestBusDeviationOf(t *testing.T) {
	p := DefaultDCBusParams()
	load := func(i int) float64 { return 0.3 + 0.5*float64(i%24)/24 }
	nominal := func(_ int, x float64) float64 { return ExpectedBusV(480, x, p) }
	low := func(_ int, x float64) float64 { return 0.85 * ExpectedBusV(480, x, p) }
	flat := func(int, float64) float64 { return 5 }
	cases := []struct {
		name string
		bus  func(int, float64) float64
		want float64
	}{
		{"as expected", nominal, 0},
		{"15 % low", low, -0.15},
	}
	for _, c := range cases {
		d := BusDeviationOf(dcSeries(3, load, c.bus, flat), 480, 100, p)
		if d.Samples != 72 || !dutyNear(d.MedianFraction, c.want, 1e-9) {
			t.Errorf("%s: %+v, want median %v over 72", c.name, d, c.want)
		}
	}
	// A powered-down reading (0 V) is left out, not read as -100 %.
	s := dcSeries(1, load, nominal, flat)
	s[3].BusV = 0
	if d := BusDeviationOf(s, 480, 100, p); d.Samples != 23 || !dutyNear(d.MedianFraction, 0, 1e-9) {
		t.Errorf("powered-down reading: %+v", d)
	}
}

// dcCramer solves the 3-parameter least-squares problem y = b0 + b1·x +
// b2·t through its normal equations with Cramer's rule: a second
// formulation to check gonum's QR solve against.
func dcCramer(x, tt, y []float64) [3]float64 {
	var a [3][3]float64
	var r [3]float64
	for i := range x {
		v := [3]float64{1, x[i], tt[i]}
		for j := range 3 {
			for k := range 3 {
				a[j][k] += v[j] * v[k]
			}
			r[j] += v[j] * y[i]
		}
	}
	det := func(m [3][3]float64) float64 {
		return m[0][0]*(m[1][1]*m[2][2]-m[1][2]*m[2][1]) - m[0][1]*(m[1][0]*m[2][2]-m[1][2]*m[2][0]) + m[0][2]*(m[1][0]*m[2][1]-m[1][1]*m[2][0])
	}
	d := det(a)
	var out [3]float64
	for c := range 3 {
		m := a
		for row := range 3 {
			m[row][c] = r[row]
		}
		out[c] = det(m) / d
	}
	return out
}

func TestRippleTrendOf(t *testing.T) {
	p := DefaultDCBusParams()
	const days = 90
	const at = 1_700_000_000 + 3600*24*days
	nominal := func(_ int, x float64) float64 { return ExpectedBusV(480, x, p) }
	daily := func(i int) float64 { return 0.3 + 0.6*float64(i%24)/23 }
	rising := func(i int) float64 { return 0.3 + 0.6*float64(i)/(24*days) }

	// Noise-free data recovers the generating coefficients exactly:
	// ripple = 2 + 10·x + 0.05·days.
	exact := dcSeries(days, daily, nominal, func(i int, x float64) float64 { return 2 + 10*x + 0.05*float64(i)/24 })
	r := RippleTrendOf(exact, 100, 0, at, p)
	if !r.Fitted || !dutyNear(r.InterceptV, 2, 1e-9) || !dutyNear(r.PerLoadV, 10, 1e-9) || !dutyNear(r.PerDayV, 0.05, 1e-12) {
		t.Fatalf("exact fit: %+v", r)
	}

	// Against the normal equations on noisy data.
	rng := rand.New(rand.NewPCG(13, 14))
	noisy := dcSeries(days, daily, nominal, func(i int, x float64) float64 { return 2 + 10*x + 0.03*float64(i)/24 + rng.NormFloat64()*0.3 })
	r = RippleTrendOf(noisy, 100, 0, at, p)
	var xs, ts, ys []float64
	for _, s := range noisy {
		xs, ts, ys = append(xs, s.CurrentA/100), append(ts, float64(s.At-noisy[0].At)/86400), append(ys, s.BusRippleV)
	}
	want := dcCramer(xs, ts, ys)
	if !dutyNear(r.InterceptV, want[0], 1e-6) || !dutyNear(r.PerLoadV, want[1], 1e-6) || !dutyNear(r.PerDayV, want[2], 1e-9) {
		t.Errorf("QR %v %v %v, normal equations %v", r.InterceptV, r.PerLoadV, r.PerDayV, want)
	}

	// Ripple rising only because the load rose (with its daily swing): the
	// joint fit puts it on the load and finds no trend at constant load.
	risingDaily := func(i int) float64 { return 0.2 + 0.4*float64(i)/(24*days) + 0.3*float64(i%24)/23 }
	loadOnly := dcSeries(days, risingDaily, nominal, func(_ int, x float64) float64 { return 1 + 12*x + rng.NormFloat64()*0.2 })
	if r := RippleTrendOf(loadOnly, 100, 0, at, p); !r.Fitted || r.Method != RippleLoadAndTime || math.Abs(r.RiseFraction) > 0.05 {
		t.Errorf("load-driven ripple: rise %v, want about 0 (%+v)", r.RiseFraction, r)
	}
	// Load rising in a straight line with time: load and time cannot be
	// told apart, ripple/x is fitted instead and does not rise.
	collinear := dcSeries(days, rising, nominal, func(_ int, x float64) float64 { return 1 + 12*x + rng.NormFloat64()*0.2 })
	if r := RippleTrendOf(collinear, 100, 0, at, p); !r.Fitted || r.Method != RipplePerLoad || r.RiseFraction > 0.05 {
		t.Errorf("collinear load-driven ripple: %+v", r)
	}
	// ... while ageing on top of the same rising load still shows: ripple
	// proportional to load, 50 % more at the same load by the end.
	collinearAgeing := dcSeries(days, rising, nominal, func(i int, x float64) float64 { return 12 * x * (1 + 0.5*float64(i)/(24*days)) })
	if r := RippleTrendOf(collinearAgeing, 100, 0, at, p); r.Method != RipplePerLoad || !dutyNear(r.RiseFraction, 0.5, 0.01) {
		t.Errorf("collinear ageing: %+v", r)
	}
	// A constant load: the load term drops out and the trend still shows.
	flatLoad := dcSeries(days, func(int) float64 { return 0.6 }, nominal, func(i int, _ float64) float64 { return 8 * (1 + float64(i)/(24*days)) })
	if r := RippleTrendOf(flatLoad, 100, 0, at, p); !r.Fitted || !dutyNear(r.RiseFraction, 1, 0.01) {
		t.Errorf("constant load, ripple doubling: %+v", r)
	}
	// Too little data: not fitted.
	if r := RippleTrendOf(exact[:30], 100, 0, at, p); r.Fitted {
		t.Errorf("30 samples were fitted: %+v", r)
	}
}

func TestTripOnDeceleration(t *testing.T) {
	s := []Sample{dutySample(0, 50, math.NaN()), dutySample(1, 50, math.NaN()), dutySample(2, 40, math.NaN())}
	s[2].FrequencyHz = 30 // falling from 50 Hz
	noFreq := slices.Clone(s)
	noFreq[2].FrequencyHz = math.NaN()
	cases := []struct {
		name    string
		e       Event
		samples []Sample
		want    bool
	}{
		{"state decelerating", Event{At: s[2].At + 10, State: StateDecelerating}, nil, true},
		{"state steady", Event{At: s[2].At + 10, State: StateSteady}, s, false},
		{"state unknown, frequency falling", Event{At: s[2].At + 10}, s, true},
		{"state unknown, frequency steady", Event{At: s[1].At + 10}, s, false},
		{"state unknown, frequency not logged", Event{At: s[2].At + 10}, noFreq, false},
		{"state unknown, no samples before", Event{At: s[0].At - 10}, s, false},
	}
	for _, c := range cases {
		if got, how := TripOnDeceleration(c.e, c.samples); got != c.want || how == "" {
			t.Errorf("%s: %v (%s), want %v", c.name, got, how, c.want)
		}
	}
}

func TestAssessDCBus(t *testing.T) {
	p := DefaultDCBusParams()
	r := dutyTestRatings() // 480 V class, 100 A, trip 815 V (from memory default)
	const days = 90
	at := int64(1_700_000_000 + 3600*24*days)
	rng := rand.New(rand.NewPCG(15, 16))
	daily := func(i int) float64 { return 0.3 + 0.6*float64(i%24)/23 }
	rising := func(i int) float64 { return 0.3 + 0.6*float64(i)/(24*days) }
	nominal := func(_ int, x float64) float64 { return ExpectedBusV(480, x, p) * (1 + 0.01*rng.NormFloat64()) }
	steadyRipple := func(_ int, x float64) float64 { return 2 + 10*x + 0.2*rng.NormFloat64() }
	ageing := func(grow float64) func(int, float64) float64 {
		return func(i int, x float64) float64 { return (2 + 10*x) * (1 + grow*float64(i)/(24*days)) }
	}
	decelSeries := dcSeries(days, daily, nominal, steadyRipple)
	last := len(decelSeries) - 1
	decelSeries[last-1].FrequencyHz, decelSeries[last].FrequencyHz = 50, 20
	nearTrip := dcSeries(days, daily, nominal, steadyRipple)
	nearTrip[len(nearTrip)-5].BusV = 790 // 97 % of 815 V
	cases := []struct {
		name string
		s    []Sample
		ev   []Event
		line float64
		want []string
	}{
		{"clean", dcSeries(days, daily, nominal, steadyRipple), nil, 0, nil},
		// Handbook arithmetic: a 480 V supply gives 679 V light; a bus 15 % low
		// (10 % threshold, from memory) is minor, 25 % low is major.
		{"bus 15 % low", dcSeries(days, daily, func(i int, x float64) float64 { return 0.85 * nominal(i, x) }, steadyRipple), nil, 0, []string{"dc_bus.voltage_deviation:minor"}},
		{"bus 25 % low", dcSeries(days, daily, func(i int, x float64) float64 { return 0.75 * nominal(i, x) }, steadyRipple), nil, 0, []string{"dc_bus.voltage_deviation:major"}},
		// The same bus judged on a 400 V registration reads 20 % high.
		{"registered 400 V", dcSeries(days, daily, nominal, steadyRipple), nil, 400, []string{"dc_bus.voltage_deviation:minor"}},
		// Ripple at the same load 40 % up by the end (25 % threshold, kelvard
		// default): minor; 80 % up (past twice the threshold): major.
		{"ripple ageing 40 %", dcSeries(days, daily, nominal, ageing(0.4)), nil, 0, []string{"dc_bus.ripple_rising:minor"}},
		{"ripple ageing 80 %", dcSeries(days, daily, nominal, ageing(0.8)), nil, 0, []string{"dc_bus.ripple_rising:major"}},
		{"ripple up with load only", dcSeries(days, rising, nominal, steadyRipple), nil, 0, nil},
		{"ripple up with load and its daily swing", dcSeries(days, func(i int) float64 { return rising(i)/2 + daily(i)/2 }, nominal, steadyRipple), nil, 0, nil},
		{"over-voltage trip, decelerating", dcSeries(days, daily, nominal, steadyRipple),
			[]Event{{At: at - 3600, Type: EventTrip, Cause: TripOverVoltage, State: StateDecelerating}}, 0,
			[]string{"dc_bus.overvoltage_on_deceleration:major"}},
		{"over-voltage trip, state unknown, frequency falling", decelSeries,
			[]Event{{At: decelSeries[last].At + 60, Type: EventTrip, Cause: TripOverVoltage}}, 0,
			[]string{"dc_bus.overvoltage_on_deceleration:major"}},
		{"over-voltage trip while steady", dcSeries(days, daily, nominal, steadyRipple),
			[]Event{{At: at - 3600, Type: EventTrip, Cause: TripOverVoltage, State: StateSteady}}, 0, nil},
		{"over-voltage trip outside the window", dcSeries(days, daily, nominal, steadyRipple),
			[]Event{{At: at - 100*86400, Type: EventTrip, Cause: TripOverVoltage, State: StateDecelerating}}, 0, nil},
		{"bus near the trip", nearTrip, nil, 0, []string{"dc_bus.near_overvoltage_trip:minor"}},
	}
	for _, c := range cases {
		a, err := AssessDCBus(DCBusInput{Ratings: r, Duty: DutyNormal, SupplyLineV: c.line, Samples: c.s, Events: c.ev, At: at}, p)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if got := dutyRuleIDs(a.Findings); !slices.Equal(got, c.want) {
			t.Errorf("%s: findings %v, want %v (deviation %+v, ripple rise %v)", c.name, got, c.want, a.Deviation, a.Ripple.RiseFraction)
		}
		for _, f := range a.Findings {
			dutyCheckFinding(t, f)
		}
	}
	if _, err := AssessDCBus(DCBusInput{Ratings: Ratings{}}, p); err == nil {
		t.Error("a model without rated current gave no error")
	}
}

func BenchmarkBusDeviationOf(b *testing.B) {
	p := DefaultDCBusParams()
	s := dcSeries(7, func(i int) float64 { return 0.5 }, func(_ int, x float64) float64 { return ExpectedBusV(480, x, p) }, func(int, float64) float64 { return 5 })
	for b.Loop() {
		BusDeviationOf(s, 480, 100, p)
	}
}

func BenchmarkRippleTrendOf(b *testing.B) {
	p := DefaultDCBusParams()
	s := dcSeries(90, func(i int) float64 { return 0.3 + 0.6*float64(i%24)/23 }, func(int, float64) float64 { return 650 },
		func(i int, x float64) float64 { return 2 + 10*x + 0.01*float64(i)/24 })
	for b.Loop() {
		RippleTrendOf(s, 100, 0, 1_800_000_000, p)
	}
}

func BenchmarkExpectedBusV(b *testing.B) {
	p := DefaultDCBusParams()
	x := 0.0
	for b.Loop() {
		x += 1e-6
		ExpectedBusV(480, x, p)
	}
}
