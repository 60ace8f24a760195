package health

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"regexp"
	"strings"
	"testing"
)

// noRippleSpec is a capacitor rated without ripple and with no ripple term,
// the form of the check values in makers' application notes.
func noRippleSpec(lifeH, tempC float64) CapacitorSpec {
	return CapacitorSpec{RatedLifeH: lifeH, RatedTempC: tempC}
}

// rippleSpec is an ordinary 105 °C part rated with ripple, 5 °C rise at a
// reference current of 37.3 A (an awkward number on purpose).
func rippleSpec() CapacitorSpec {
	s := DefaultCapacitorSpec()
	s.RippleRefCurrentA = 37.3
	return s
}

func TestCapacitorLifeTenDegreeCheckValues(t *testing.T) {
	// Source: capacitor makers' application notes, 10-degree rule
	// (DESIGN.md section 3 lists these check values).
	cases := []struct {
		name          string
		lifeH, ratedC float64
		coreC, want   float64
	}{
		{"2000 h at 105 °C gives 32 000 h at 65 °C", 2000, 105, 65, 32000},
		{"5000 h at 105 °C gives 80 000 h at 65 °C", 5000, 105, 65, 80000},
		{"5000 h at 105 °C gives 5000 h at 105 °C", 5000, 105, 105, 5000},
		{"5000 h at 105 °C gives 2500 h at 115 °C", 5000, 105, 115, 2500},
		{"5000 h at 105 °C gives 320 000 h at 45 °C", 5000, 105, 45, 320000},
		{"2000 h at 85 °C gives 8000 h at 65 °C", 2000, 85, 65, 8000},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			got := noRippleSpec(c.lifeH, c.ratedC).LifeH(c.coreC)
			if got != c.want {
				t.Fatalf("LifeH(%v) = %v, want exactly %v", c.coreC, got, c.want)
			}
		})
	}
}

func TestCapacitorLifeAtRatedPointIsExactlyL0(t *testing.T) {
	// Source: DESIGN.md section 3 — rated life is specified at rated
	// temperature with rated ripple current, so the model must return
	// exactly L0 there (makers' life formulas compare core temperatures).
	for _, ea := range []float64{0, 0.7, 0.94} {
		for _, iref := range []float64{37.3, 49, 3, 1e-3, 1234.567} {
			s := CapacitorSpec{RatedLifeH: 5000, RatedTempC: 105, RatingIncludesRipple: true, RippleRiseC: 5, RippleRefCurrentA: iref, ActivationEnergyEV: ea}
			core := s.CoreTempC(105, iref)
			if core != 110 {
				t.Fatalf("Ea %v, Iref %v: core %v, want exactly 110", ea, iref, core)
			}
			if got := s.LifeH(core); got != 5000 {
				t.Fatalf("Ea %v, Iref %v: life %v, want exactly 5000", ea, iref, got)
			}
		}
	}
	// A rating without ripple compares the core with T0 itself.
	s := CapacitorSpec{RatedLifeH: 5000, RatedTempC: 105, RippleRiseC: 5, RippleRefCurrentA: 10}
	if got := s.LifeH(s.CoreTempC(100, 10)); got != 5000 {
		t.Fatalf("rating without ripple: life %v, want 5000", got)
	}
}

func TestCapacitorCoreTemperature(t *testing.T) {
	// Ripple self-heating grows with the square of the current (makers'
	// life formulas); values by hand arithmetic.
	s := rippleSpec()
	cases := []struct{ air, cur, want float64 }{
		{40, 0, 40},
		{40, 37.3, 45},
		{40, 37.3 / 2, 41.25},
		{40, 2 * 37.3, 60},
	}
	for _, c := range cases {
		if got := s.CoreTempC(c.air, c.cur); math.Abs(got-c.want) > 1e-12 {
			t.Errorf("CoreTempC(%v, %v) = %v, want %v", c.air, c.cur, got, c.want)
		}
	}
	if got := noRippleSpec(5000, 105).CoreTempC(40, 999); got != 40 {
		t.Errorf("no ripple term: core %v, want the air 40", got)
	}
}

func TestTenDegreeRuleEquivalentActivationEnergy(t *testing.T) {
	// Source: Arrhenius law; DESIGN.md section 3 — the 10-degree rule
	// matches Ea ≈ 0.79 eV between 85 and 95 °C and about 0.60 eV between
	// 40 and 50 °C. The equivalent is computed from the two models in each
	// window, then checked against k*ln2*T1*T2/10 (kelvin).
	ten := noRippleSpec(5000, 105)
	cases := []struct {
		t1, t2, want, tol float64
	}{
		{85, 95, 0.79, 0.005},
		{40, 50, 0.60, 0.006},
	}
	for _, c := range cases {
		ea := ActivationEnergyFromLives(c.t1, ten.LifeH(c.t1), c.t2, ten.LifeH(c.t2))
		if math.Abs(ea-c.want) > c.tol {
			t.Errorf("window %v-%v °C: equivalent Ea %.4f eV, want %.2f ± %v", c.t1, c.t2, ea, c.want, c.tol)
		}
		closed := BoltzmannEV * math.Ln2 * (c.t1 + 273.15) * (c.t2 + 273.15) / 10
		if math.Abs(ea-closed) > 1e-12 {
			t.Errorf("window %v-%v °C: Ea %v differs from the closed form %v", c.t1, c.t2, ea, closed)
		}
		// The Arrhenius model with that Ea, anchored at the window's lower
		// end, reproduces the 10-degree life ratio across the window.
		arr := CapacitorSpec{RatedLifeH: ten.LifeH(c.t1), RatedTempC: c.t1, ActivationEnergyEV: ea}
		if got, want := arr.LifeH(c.t2), ten.LifeH(c.t2); math.Abs(got/want-1) > 1e-12 {
			t.Errorf("window %v-%v °C: Arrhenius life %v, 10-degree %v", c.t1, c.t2, got, want)
		}
	}
	// Outside its window the match fails: 0.79 eV anchored at 95 °C
	// predicts much longer life at 45 °C than the 10-degree rule.
	arr := CapacitorSpec{RatedLifeH: ten.LifeH(95), RatedTempC: 95, ActivationEnergyEV: 0.79}
	if r := arr.LifeH(45) / ten.LifeH(45); r < 1.5 {
		t.Errorf("0.79 eV at 45 °C should exceed the 10-degree life by far, ratio %v", r)
	}
}

func TestCapacitorLifeProperties(t *testing.T) {
	// Properties of the 10-degree rule (capacitor makers' application notes)
	// and of Arrhenius: hotter never lives longer; exactly 10 °C hotter
	// halves the 10-degree life exactly.
	rng := rand.New(rand.NewPCG(1, 2))
	specs := []CapacitorSpec{
		rippleSpec(),
		{RatedLifeH: 2000, RatedTempC: 85},
		{RatedLifeH: 8000, RatedTempC: 105, RatingIncludesRipple: true, RippleRiseC: 5, RippleRefCurrentA: 10, ActivationEnergyEV: 0.8},
		{RatedLifeH: 5000, RatedTempC: 105, MaxLifeH: 130000},
	}
	for i := 0; i < 20000; i++ {
		s := specs[i%len(specs)]
		a := -30 + 180*rng.Float64()
		b := a + 30*rng.Float64()
		if la, lb := s.LifeH(a), s.LifeH(b); lb > la {
			t.Fatalf("spec %d: life at %v °C (%v) exceeds life at colder %v °C (%v)", i%len(specs), b, lb, a, la)
		}
	}
	for _, s := range []CapacitorSpec{rippleSpec(), {RatedLifeH: 2000, RatedTempC: 85}, {RatedLifeH: 1234.5, RatedTempC: 105}} {
		for i := 0; i < 20000; i++ {
			// Temperatures on a 1/1024 °C grid are exact, and so are
			// T + 10 and Tref - T.
			tc := math.Round((-40+190*rng.Float64())*1024) / 1024
			if l1, l2 := s.LifeH(tc), s.LifeH(tc+10); l1 != 2*l2 {
				t.Fatalf("life at %v °C is %v, at %v °C %v: not exactly half", tc, l1, tc+10, l2)
			}
		}
	}
}

func TestCapacitorSpecValidate(t *testing.T) {
	good := rippleSpec()
	if err := good.Validate(); err != nil {
		t.Fatalf("default spec with a reference current: %v", err)
	}
	bad := map[string]func(*CapacitorSpec){
		"zero life":             func(s *CapacitorSpec) { s.RatedLifeH = 0 },
		"NaN life":              func(s *CapacitorSpec) { s.RatedLifeH = math.NaN() },
		"rated temp too hot":    func(s *CapacitorSpec) { s.RatedTempC = 250 },
		"negative ripple rise":  func(s *CapacitorSpec) { s.RippleRiseC = -1 },
		"no reference current":  func(s *CapacitorSpec) { s.RippleRefCurrentA = 0 },
		"negative Ea":           func(s *CapacitorSpec) { s.ActivationEnergyEV = -0.5 },
		"cap below rated life":  func(s *CapacitorSpec) { s.MaxLifeH = 100 },
		"NaN rated temperature": func(s *CapacitorSpec) { s.RatedTempC = math.NaN() },
	}
	for name, mut := range bad {
		s := good
		mut(&s)
		if err := s.Validate(); err == nil {
			t.Errorf("%s: Validate accepted %+v", name, s)
		}
	}
	if err := DefaultCapacitorParams().Validate(); err != nil {
		t.Fatalf("default params: %v", err)
	}
}

func TestCapacitorMeasured(t *testing.T) {
	// Source: capacitor datasheet endurance limits — end of life at 80 %
	// of initial capacitance or twice initial ESR, whichever first. Trend
	// projections are checked against hand arithmetic on exact lines.
	p := DefaultCapacitorParams()
	const day = 86400
	t0 := int64(1_700_000_000)
	line := func(n int, stepDays int, c0, cSlope, e0, eSlope float64) []CapacitorMeasurement {
		var ms []CapacitorMeasurement
		for i := 0; i < n; i++ {
			d := float64(i * stepDays)
			ms = append(ms, CapacitorMeasurement{At: t0 + int64(i*stepDays)*day, CapacitanceUF: c0 + cSlope*d, ESRMilliohm: e0 + eSlope*d})
		}
		return ms
	}
	t.Run("capacitance trend projects 400 days", func(t *testing.T) {
		// 1000 µF losing 0.5 µF/day reaches 800 µF after 400 days.
		r, err := CapacitorMeasured(line(11, 30, 1000, -0.5, 20, 0), CapacitorInitial{}, p)
		if err != nil {
			t.Fatal(err)
		}
		if r.Crossed || !r.Projected || r.DecidedBy != QuantityCapacitance {
			t.Fatalf("report %+v", r)
		}
		if want := t0 + 400*day; abs64(r.ProjectedAt-want) > 1 {
			t.Fatalf("projected %d, want %d", r.ProjectedAt, want)
		}
		if math.Abs(r.Capacitance.Progress-0.75) > 1e-12 { // 150 of 200 µF
			t.Fatalf("progress %v, want 0.75", r.Capacitance.Progress)
		}
		if math.Abs(r.Capacitance.SlopePerDay+0.5) > 1e-9 {
			t.Fatalf("slope %v, want -0.5", r.Capacitance.SlopePerDay)
		}
	})
	t.Run("ESR doubling decides first", func(t *testing.T) {
		// ESR 20 mΩ rising 0.1 mΩ/day reaches 40 mΩ at 200 days, before
		// the capacitance (400 days).
		r, _ := CapacitorMeasured(line(6, 30, 1000, -0.5, 20, 0.1), CapacitorInitial{}, p)
		if r.DecidedBy != QuantityESR || abs64(r.ProjectedAt-(t0+200*day)) > 1 {
			t.Fatalf("decided by %q at %d, want esr at %d", r.DecidedBy, r.ProjectedAt, t0+200*day)
		}
	})
	t.Run("crossed limit, supplied initial value", func(t *testing.T) {
		ms := line(5, 30, 900, -1, 20, 0) // 900, 870, 840, 810, 780
		r, _ := CapacitorMeasured(ms, CapacitorInitial{CapacitanceUF: 1000}, p)
		if !r.Crossed || r.DecidedBy != QuantityCapacitance || r.Capacitance.Limit != 800 {
			t.Fatalf("report %+v", r)
		}
		if r.CrossedAt != ms[4].At {
			t.Fatalf("crossed at %d, want the first reading past the limit %d", r.CrossedAt, ms[4].At)
		}
	})
	t.Run("ESR crossed at twice initial", func(t *testing.T) {
		ms := line(4, 30, 1000, 0, 20, 0.25) // 20, 27.5, 35, 42.5
		r, _ := CapacitorMeasured(ms, CapacitorInitial{}, p)
		if !r.Crossed || r.DecidedBy != QuantityESR || r.ESR.Limit != 40 {
			t.Fatalf("report %+v", r)
		}
	})
	t.Run("a reading past the limit followed by one inside is not crossed", func(t *testing.T) {
		ms := line(3, 30, 1000, 0, 20, 0)
		ms[1].CapacitanceUF = 790
		r, _ := CapacitorMeasured(ms, CapacitorInitial{}, p)
		if r.Crossed {
			t.Fatalf("latest value 1000 µF decides, got crossed %+v", r)
		}
	})
	t.Run("too few points for a trend", func(t *testing.T) {
		r, _ := CapacitorMeasured(line(2, 30, 1000, -1, math.NaN(), 0), CapacitorInitial{}, p)
		if r.Projected || r.HasESR || !r.HasCapacitance {
			t.Fatalf("report %+v", r)
		}
	})
	t.Run("measurements picked from samples", func(t *testing.T) {
		ss := []Sample{nanSample(1), nanSample(2), nanSample(3)}
		ss[1].CapacitanceUF = 990
		ss[2].ESRMilliohm = -1 // not a value
		ms := CapacitorMeasurements(ss)
		if len(ms) != 1 || ms[0].At != 2 || ms[0].CapacitanceUF != 990 || !math.IsNaN(ms[0].ESRMilliohm) {
			t.Fatalf("measurements %+v", ms)
		}
	})
}

func abs64(x int64) int64 {
	if x < 0 {
		return -x
	}
	return x
}

// nanSample returns a sample at the given time with nothing logged.
func nanSample(at int64) Sample {
	n := math.NaN()
	return Sample{At: at, InternalAirC: n, AmbientC: n, HeatsinkC: n, CurrentA: n, PeakCurrentA: n,
		FrequencyHz: n, BusV: n, BusRippleV: n, CapacitanceUF: n, ESRMilliohm: n}
}

func TestCapacitorFindings(t *testing.T) {
	// Thresholds: life used 1 (Palmgren–Miner), horizon 365 days with major
	// within 90 (common practice), 80 % capacitance / 2× ESR (capacitor
	// datasheet endurance limits), warning at half way (common practice).
	p := DefaultCapacitorParams()
	at := int64(1_750_000_000)
	const day = 86400
	life := func(eolDays float64) CapacitorLifeReport {
		r := CapacitorLifeReport{Law: "10-degree rule", RefTempC: 110, RatedLifeH: 5000, EquivalentCoreC: 70}
		r.LifeUsedFraction = 0.5
		r.MeanTempC = math.NaN()
		r.Projected = true
		r.EndOfLifeAt = at + int64(eolDays*day)
		r.EndOfLifeEarliestAt, r.EndOfLifeLatestAt = r.EndOfLifeAt-10*day, r.EndOfLifeAt+10*day
		r.RemainingH = eolDays * 24
		r.RemainingAtPresentH = math.Inf(1)
		return r
	}
	measured := func(progress float64, crossed bool) CapacitorMeasuredReport {
		tr := CapacitorTrend{Quantity: QuantityCapacitance, Unit: "uF", Points: 5, Initial: 1000, Limit: 800,
			Latest: 1000 - 200*progress, Progress: progress, Crossed: crossed, CrossedAt: at - day}
		return CapacitorMeasuredReport{HasCapacitance: true, Capacitance: tr, Crossed: crossed, CrossedAt: tr.CrossedAt, DecidedBy: QuantityCapacitance}
	}
	reached := life(-5)
	reached.EndReached, reached.EndReachedAt, reached.LifeUsedFraction = true, at-5*day, 1.02
	cases := []struct {
		name string
		life CapacitorLifeReport
		meas CapacitorMeasuredReport
		want map[string]Severity
	}{
		{"life used up", reached, CapacitorMeasuredReport{}, map[string]Severity{"capacitor.end_of_life": SeverityCritical}},
		{"measured limit crossed", life(1000), measured(1.1, true), map[string]Severity{"capacitor.end_of_life": SeverityCritical}},
		{"60 days left", life(60), CapacitorMeasuredReport{}, map[string]Severity{"capacitor.end_of_life_near": SeverityMajor}},
		{"200 days left", life(200), CapacitorMeasuredReport{}, map[string]Severity{"capacitor.end_of_life_near": SeverityMinor}},
		{"400 days left", life(400), CapacitorMeasuredReport{}, map[string]Severity{}},
		{"projected date already past", life(-3), CapacitorMeasuredReport{}, map[string]Severity{"capacitor.end_of_life_near": SeverityMajor}},
		{"not projected", CapacitorLifeReport{LifeReport: LifeReport{RemainingH: math.Inf(1), MeanTempC: math.NaN()}, EquivalentCoreC: math.NaN()}, CapacitorMeasuredReport{}, map[string]Severity{}},
		{"measured 60 % of the way", life(1000), measured(0.6, false), map[string]Severity{"capacitor.measured_degradation": SeverityMinor}},
		{"measured 85 % of the way", life(1000), measured(0.85, false), map[string]Severity{"capacitor.measured_degradation": SeverityMajor}},
		{"measured 30 % of the way", life(1000), measured(0.3, false), map[string]Severity{}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			fs := CapacitorFindings(p, c.life, c.meas, at)
			got := map[string]Severity{}
			for _, f := range fs {
				got[f.Rule] = f.Severity
				checkFinding(t, f, capacitorRules)
			}
			if len(got) != len(c.want) {
				t.Fatalf("findings %v, want %v", got, c.want)
			}
			for r, s := range c.want {
				if got[r] != s {
					t.Fatalf("rule %s severity %q, want %q (all %v)", r, got[r], s, got)
				}
			}
		})
	}
	// A measured trend earlier than the thermal projection decides the date.
	m := measured(0.4, false)
	m.Projected, m.ProjectedAt = true, at+30*day
	fs := CapacitorFindings(p, life(300), m, at)
	if len(fs) != 1 || fs[0].Severity != SeverityMajor || !strings.Contains(fs[0].Message, "measured capacitance trend") {
		t.Fatalf("findings %+v", fs)
	}
}

var ruleIDPattern = regexp.MustCompile(`^[a-z][a-z0-9_]*(\.[a-z][a-z0-9_]*)+$`)

// checkFinding checks the shape every finding must have: a catalogued rule,
// its kind, a valid severity, a message, evidence with at least one source,
// a remedy, and JSON encoding.
func checkFinding(t *testing.T, f Finding, rules []RuleInfo) {
	t.Helper()
	var info *RuleInfo
	for i := range rules {
		if rules[i].ID == f.Rule {
			info = &rules[i]
		}
	}
	if info == nil {
		t.Fatalf("finding rule %q is not in the rule list", f.Rule)
	}
	if f.Kind != info.Kind || !f.Severity.Valid() || f.Message == "" || f.Remedy == "" || len(f.Evidence) == 0 {
		t.Fatalf("malformed finding %+v", f)
	}
	sourced := false
	for _, e := range f.Evidence {
		if e.Name == "" {
			t.Fatalf("evidence without a name in %+v", f)
		}
		sourced = sourced || e.Source != ""
	}
	if !sourced {
		t.Fatalf("finding %s names no source in its evidence", f.Rule)
	}
	if _, err := json.Marshal(f); err != nil {
		t.Fatalf("finding %s does not encode: %v", f.Rule, err)
	}
}

func TestRuleLists(t *testing.T) {
	seen := map[string]bool{}
	for _, list := range [][]RuleInfo{capacitorRules, fanRules, storageRules, heatsinkRules} {
		for _, r := range list {
			if !ruleIDPattern.MatchString(r.ID) || !r.Kind.Valid() || r.Title == "" || r.Remedy == "" {
				t.Errorf("bad rule %+v", r)
			}
			if seen[r.ID] {
				t.Errorf("rule %s listed twice", r.ID)
			}
			seen[r.ID] = true
			if !strings.HasPrefix(r.ID, string(r.Kind)+".") {
				t.Errorf("rule %s does not start with its kind %s", r.ID, r.Kind)
			}
		}
	}
	for _, id := range []string{"capacitor.end_of_life", "capacitor.end_of_life_near", "capacitor.measured_degradation",
		"storage.energise_due", "storage.reform_required", "fan.end_of_life", "fan.end_of_life_near", "fan.heatsink_rise"} {
		if !seen[id] {
			t.Errorf("rule %s missing", id)
		}
	}
}
