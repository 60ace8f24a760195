package health

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

// dutyTestRatings is a 480 V model of 100 A normal duty / 77 A heavy duty
// with the default derating data.
func dutyTestRatings() Ratings {
	r := DefaultRatings(480)
	r.NormalDutyA, r.HeavyDutyA = 100, 77
	r.NormalDutyKW, r.HeavyDutyKW = 55, 45
	return r
}

func dutyNear(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

func TestAmbientFactor(t *testing.T) {
	r := dutyTestRatings()
	// Common practice (DESIGN.md section 3): rated at 40 °C, about 1 % per °C
	// above, factor 0 beyond the model's maximum (50 °C here).
	cases := []struct {
		ambientC, want float64
	}{
		{-20, 1}, {25, 1}, {40, 1}, {41, 0.99}, {45, 0.95}, {50, 0.90}, {50.01, 0}, {60, 0},
	}
	for _, c := range cases {
		f, err := AmbientFactor(r, c.ambientC)
		if err != nil {
			t.Fatalf("AmbientFactor(%v): %v", c.ambientC, err)
		}
		if !dutyNear(f.Value, c.want, 1e-12) {
			t.Errorf("AmbientFactor(%v) = %v, want %v", c.ambientC, f.Value, c.want)
		}
		if f.Name != FactorAmbient || f.Input != c.ambientC || f.Source == "" || f.Unit != "°C" {
			t.Errorf("AmbientFactor(%v) reports %+v; want name, input, unit and source", c.ambientC, f)
		}
		if f.OutOfRating() != (c.want == 0) {
			t.Errorf("AmbientFactor(%v).OutOfRating() = %v", c.ambientC, f.OutOfRating())
		}
	}
	if _, err := AmbientFactor(r, math.NaN()); err == nil {
		t.Error("AmbientFactor(NaN) gave no error")
	}
}

func TestAltitudeFactor(t *testing.T) {
	r := dutyTestRatings()
	// IEC 61800-2 sets 1000 m as the rating point; about 1 % per 100 m above
	// it is common practice; the 3000 m maximum is the from-memory default.
	cases := []struct {
		altitudeM, want float64
	}{
		{-50, 1}, {0, 1}, {1000, 1}, {1100, 0.99}, {1500, 0.95}, {2000, 0.90}, {3000, 0.80}, {3001, 0},
	}
	for _, c := range cases {
		f, err := AltitudeFactor(r, c.altitudeM)
		if err != nil {
			t.Fatalf("AltitudeFactor(%v): %v", c.altitudeM, err)
		}
		if !dutyNear(f.Value, c.want, 1e-12) {
			t.Errorf("AltitudeFactor(%v) = %v, want %v", c.altitudeM, f.Value, c.want)
		}
		if f.Name != FactorAltitude || f.Unit != "m" || !strings.Contains(f.Source, "IEC 61800-2") {
			t.Errorf("AltitudeFactor(%v) reports %+v", c.altitudeM, f)
		}
	}
	if _, err := AltitudeFactor(r, math.Inf(1)); err == nil {
		t.Error("AltitudeFactor(+Inf) gave no error")
	}
}

func TestCarrierFactor(t *testing.T) {
	r := dutyTestRatings()
	// The default table (from memory): 4 kHz default, 0.90 at 6, 0.80 at 8,
	// 0.65 at 12, 0.55 at 16 kHz; linear between points (common practice).
	cases := []struct {
		khz, want float64
	}{
		{0, 1}, {2, 1}, {4, 1}, {5, 0.95}, {6, 0.90}, {7, 0.85}, {10, 0.725}, {16, 0.55}, {16.5, 0},
	}
	for _, c := range cases {
		f, err := CarrierFactor(r, c.khz)
		if err != nil {
			t.Fatalf("CarrierFactor(%v): %v", c.khz, err)
		}
		if !dutyNear(f.Value, c.want, 1e-12) {
			t.Errorf("CarrierFactor(%v) = %v, want %v", c.khz, f.Value, c.want)
		}
	}
	f, _ := CarrierFactor(r, math.NaN())
	if f.Value != 1 || f.Input != 4 {
		t.Errorf("CarrierFactor(NaN) = %+v, want the default carrier and 1", f)
	}
	if _, err := CarrierFactor(r, -1); err == nil {
		t.Error("CarrierFactor(-1) gave no error")
	}
	// A model with no table gives no rating above its default carrier.
	r.CarrierTable = nil
	if f, _ := CarrierFactor(r, 5); f.Value != 0 {
		t.Errorf("CarrierFactor without a table at 5 kHz = %v, want 0", f.Value)
	}
}

func TestSupplyFactor(t *testing.T) {
	r := dutyTestRatings()
	single := dutyTestRatings()
	single.SupplyPhases = 1
	// Common practice: a three-phase drive on one phase is cut to about
	// 50-58 %; the default model factor is 0.50.
	cases := []struct {
		name       string
		r          Ratings
		phases     int
		configured float64
		want       float64
	}{
		{"three-phase model, three-phase supply", r, 3, 0, 1},
		{"phases unknown means as rated", r, 0, 0, 1},
		{"three-phase model, single phase, nothing set", r, 1, 0, 0.50},
		{"three-phase model, single phase, 0.58 set", r, 1, 0.58, 0.58},
		{"single-phase model on single phase", single, 1, 0, 1},
	}
	for _, c := range cases {
		f, err := SupplyFactor(c.r, c.phases, c.configured)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if f.Value != c.want {
			t.Errorf("%s: factor %v, want %v", c.name, f.Value, c.want)
		}
	}
	for _, bad := range []struct {
		phases int
		conf   float64
	}{{2, 0}, {1, -0.1}, {1, 1.5}, {1, math.NaN()}} {
		if _, err := SupplyFactor(r, bad.phases, bad.conf); err == nil {
			t.Errorf("SupplyFactor(%d, %v) gave no error", bad.phases, bad.conf)
		}
	}
}

func TestAllowedCurrent(t *testing.T) {
	r := dutyTestRatings()
	cases := []struct {
		name string
		app  Application
		want float64
		duty Duty
	}{
		// Rated conditions: the duty-class rating itself.
		{"rated point, normal duty", Application{Duty: DutyNormal, AmbientC: 40, AltitudeM: 500}, 100, DutyNormal},
		{"rated point, heavy duty", Application{Duty: DutyHeavy, AmbientC: 40, AltitudeM: 500}, 77, DutyHeavy},
		// Common practice factors multiply: 100 × 0.95 (45 °C) × 0.95 (1500 m) × 0.80 (8 kHz) = 72.2 A.
		{"all factors", Application{Duty: DutyNormal, AmbientC: 45, AltitudeM: 1500, CarrierKHz: 8, SupplyPhases: 3}, 72.2, DutyNormal},
		// Single phase, nothing set: 100 × 0.5 = 50 A.
		{"single phase", Application{Duty: DutyNormal, AmbientC: 30, SupplyPhases: 1}, 50, DutyNormal},
		// Beyond the maximum ambient: out of rating, 0 A.
		{"above max ambient", Application{Duty: DutyNormal, AmbientC: 52}, 0, DutyNormal},
	}
	for _, c := range cases {
		al, err := AllowedCurrent(r, c.app)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if !dutyNear(al.AllowedA, c.want, 1e-9) {
			t.Errorf("%s: allowed %v A, want %v A", c.name, al.AllowedA, c.want)
		}
		if al.Duty != c.duty || len(al.Factors) != 4 {
			t.Errorf("%s: duty %v with %d factors, want %v with 4", c.name, al.Duty, len(al.Factors), c.duty)
		}
	}
	// A model rated for heavy duty only answers heavy duty whatever is asked.
	h := dutyTestRatings()
	h.NormalDutyA, h.NormalDutyKW = 0, 0
	al, err := AllowedCurrent(h, Application{Duty: DutyNormal, AmbientC: 20})
	if err != nil || al.Duty != DutyHeavy || al.AllowedA != 77 {
		t.Errorf("heavy-only model: %+v, %v", al, err)
	}
	// Invalid ratings and inputs are errors, not numbers.
	bad := dutyTestRatings()
	bad.CarrierTable = []CarrierPoint{{KHz: 8, Factor: 0.8}, {KHz: 12, Factor: 0.9}}
	if _, err := AllowedCurrent(bad, Application{AmbientC: 20}); err == nil {
		t.Error("a carrier table whose factor rises gave no error")
	}
	if _, err := AllowedCurrent(r, Application{AmbientC: math.NaN()}); err == nil {
		t.Error("a NaN ambient gave no error")
	}
}

func TestRatingsValidate(t *testing.T) {
	if err := dutyTestRatings().Validate(); err != nil {
		t.Fatalf("default ratings: %v", err)
	}
	mut := []struct {
		name string
		f    func(*Ratings)
	}{
		{"no current", func(r *Ratings) { r.NormalDutyA, r.HeavyDutyA = 0, 0 }},
		{"phases", func(r *Ratings) { r.SupplyPhases = 2 }},
		{"max ambient below rated", func(r *Ratings) { r.MaxAmbientC = 35 }},
		{"max altitude below rating", func(r *Ratings) { r.MaxAltitudeM = 500 }},
		{"single-phase factor", func(r *Ratings) { r.SinglePhaseFactor = 1.2 }},
		{"overload below 1", func(r *Ratings) { r.NormalOverload.Fraction = 0.9 }},
		{"carrier point below default", func(r *Ratings) { r.CarrierTable[0].KHz = 3 }},
		{"negative slope", func(r *Ratings) { r.AmbientSlopePerC = -0.01 }},
		{"voltage", func(r *Ratings) { r.VoltageClassV = 0 }},
	}
	for _, m := range mut {
		r := dutyTestRatings()
		r.CarrierTable = slices.Clone(r.CarrierTable)
		m.f(&r)
		if err := r.Validate(); err == nil {
			t.Errorf("%s: Validate gave no error", m.name)
		}
	}
}

func TestDefaultBusTripV(t *testing.T) {
	// From memory: 400/480 V drives trip on over-voltage at roughly 800-830 V DC.
	v := DefaultBusTripV(480)
	if v < 800 || v > 830 {
		t.Errorf("DefaultBusTripV(480) = %v, want 800-830 V", v)
	}
	if got := DefaultRatings(480).BusTripV; got != v {
		t.Errorf("DefaultRatings(480).BusTripV = %v, want %v", got, v)
	}
}

func TestRatedLossesW(t *testing.T) {
	// Common practice: losses about 2-3 % of rated power; 2.5 % of 55 kW = 1375 W.
	if got := dutyTestRatings().RatedLossesW(DutyNormal); !dutyNear(got, 1375, 1e-9) {
		t.Errorf("RatedLossesW = %v, want 1375", got)
	}
}

func dutyRuleIDs(fs []Finding) []string {
	var ids []string
	for _, f := range fs {
		ids = append(ids, f.Rule+":"+string(f.Severity))
	}
	slices.Sort(ids)
	return ids
}

func TestDeratingFindings(t *testing.T) {
	r := dutyTestRatings()
	p := DefaultDeratingParams()
	nan := math.NaN()
	cases := []struct {
		name     string
		app      Application
		designC  float64
		wantRule []string
	}{
		{"clean", Application{AmbientC: 35, AltitudeM: 200}, 35, nil},
		{"cabinet drive, design unknown", Application{AmbientC: 35}, nan, nil},
		// Common practice: 1 %/°C above 40 °C; 43 °C is 3 K above (minor), 48 °C is 8 K above (major).
		{"design 3 K above rated", Application{AmbientC: 43}, 43, []string{"environment.ambient_above_rating:minor"}},
		{"design 8 K above rated", Application{AmbientC: 48}, 48, []string{"environment.ambient_above_rating:major"}},
		// Beyond the maximum ambient the factor is 0: out of rating, critical, and only once.
		{"design above max", Application{AmbientC: 53}, 53, []string{"derating.out_of_rating:critical"}},
		{"drive air above max, design inside", Application{AmbientC: 55}, 30, []string{"derating.out_of_rating:critical"}},
		{"single phase, nothing set", Application{AmbientC: 30, SupplyPhases: 1}, 30, []string{"derating.single_phase_supply:major"}},
		{"single phase, factor set", Application{AmbientC: 30, SupplyPhases: 1, SinglePhaseFactor: 0.55}, 30, nil},
		// IEC 60664-1: insulation clearances need checking above 2000 m.
		{"2500 m", Application{AmbientC: 30, AltitudeM: 2500}, 30, []string{"environment.altitude_insulation:advice"}},
		{"3500 m", Application{AmbientC: 30, AltitudeM: 3500}, 30, []string{"derating.out_of_rating:critical", "environment.altitude_insulation:advice"}},
		{"carrier beyond table", Application{AmbientC: 30, CarrierKHz: 20}, 30, []string{"derating.out_of_rating:critical"}},
	}
	for _, c := range cases {
		al, err := AllowedCurrent(r, c.app)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		fs := DeratingFindings(r, c.app, al, c.designC, p)
		if got := dutyRuleIDs(fs); !slices.Equal(got, c.wantRule) {
			t.Errorf("%s: findings %v, want %v", c.name, got, c.wantRule)
		}
		for _, f := range fs {
			dutyCheckFinding(t, f)
		}
	}
}

// dutyAllRules gathers the rule lists of this part of the package.
func dutyAllRules() []RuleInfo {
	return slices.Concat(deratingRules, dutyRules, cabinetRules, dcBusRules, dataQualityRules)
}

// dutyCheckFinding checks that a finding is complete: a listed rule, its
// kind, a message, evidence and a remedy.
func dutyCheckFinding(t *testing.T, f Finding) {
	t.Helper()
	all := dutyAllRules()
	i := slices.IndexFunc(all, func(r RuleInfo) bool { return r.ID == f.Rule })
	if i < 0 {
		t.Errorf("finding %s is not listed in any rule list", f.Rule)
		return
	}
	if f.Kind != all[i].Kind || !f.Kind.Valid() || !f.Severity.Valid() {
		t.Errorf("finding %s: kind %q severity %q", f.Rule, f.Kind, f.Severity)
	}
	if f.Message == "" || f.Remedy == "" || len(f.Evidence) == 0 {
		t.Errorf("finding %s lacks a message, remedy or evidence: %+v", f.Rule, f)
	}
	if !strings.HasPrefix(f.Rule, string(f.Kind)+".") {
		t.Errorf("finding %s does not start with its kind %s", f.Rule, f.Kind)
	}
	if !strings.HasPrefix(f.Remedy, all[i].Remedy) {
		t.Errorf("finding %s: remedy does not start with the rule's remedy", f.Rule)
	}
	// Evidence carries values, the thresholds they were held to and a source.
	hasLimit := slices.ContainsFunc(f.Evidence, func(e Evidence) bool { return e.Limit != nil })
	hasSource := slices.ContainsFunc(f.Evidence, func(e Evidence) bool { return e.Source != "" })
	if !hasLimit || !hasSource {
		t.Errorf("finding %s: evidence lacks a limit (%v) or a source (%v): %+v", f.Rule, hasLimit, hasSource, f.Evidence)
	}
}

func TestDutyRuleLists(t *testing.T) {
	seen := map[string]bool{}
	for _, r := range dutyAllRules() {
		if seen[r.ID] {
			t.Errorf("rule %s listed twice", r.ID)
		}
		seen[r.ID] = true
		if !r.Kind.Valid() || !strings.HasPrefix(r.ID, string(r.Kind)+".") || r.Title == "" || r.Remedy == "" {
			t.Errorf("rule %+v is incomplete", r)
		}
	}
	if len(seen) != 18 {
		t.Errorf("%d rules listed, want 18", len(seen))
	}
}

func TestSafetyCautionOnPhysicalRemedies(t *testing.T) {
	// DESIGN.md section 7: every proposal of physical work carries the caution.
	r := dutyTestRatings()
	app := Application{AmbientC: 30, AltitudeM: 2500, SupplyPhases: 1}
	al, err := AllowedCurrent(r, app)
	if err != nil {
		t.Fatal(err)
	}
	fs := DeratingFindings(r, app, al, 30, DefaultDeratingParams())
	if len(fs) != 2 {
		t.Fatalf("findings %v, want single-phase and altitude", dutyRuleIDs(fs))
	}
	for _, f := range fs {
		physical := f.Rule == "derating.single_phase_supply"
		if f.PhysicalWork != physical || strings.Contains(f.Remedy, SafetyCaution) {
			t.Errorf("%s: physical work %v, want %v (the caution is shown beside the remedy, not in it)", f.Rule, f.PhysicalWork, physical)
		}
	}
}

// dutyRandomRatings draws a valid model at random.
func dutyRandomRatings(rng *rand.Rand) Ratings {
	r := DefaultRatings([]float64{230, 400, 480, 600}[rng.IntN(4)])
	r.NormalDutyA = 1 + rng.Float64()*500
	r.HeavyDutyA = r.NormalDutyA * (0.6 + 0.4*rng.Float64())
	r.RatedAmbientC = 35 + rng.Float64()*20
	r.MaxAmbientC = r.RatedAmbientC + rng.Float64()*20
	r.AmbientSlopePerC = rng.Float64() * 0.05 // a steep slope may reach 0 before the maximum
	r.AltitudeRatingM = 1000 + rng.Float64()*1000
	r.MaxAltitudeM = r.AltitudeRatingM + rng.Float64()*4000
	r.AltitudeSlopePer100M = rng.Float64() * 0.03
	r.DefaultCarrierKHz = 1 + rng.Float64()*7
	r.CarrierTable = nil
	k, f := r.DefaultCarrierKHz, 1.0
	for range rng.IntN(6) {
		k += 0.5 + rng.Float64()*4
		f *= rng.Float64()
		r.CarrierTable = append(r.CarrierTable, CarrierPoint{KHz: k, Factor: f})
	}
	r.SinglePhaseFactor = 0.5 + 0.08*rng.Float64()
	return r
}

func TestDerateFactorsProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for i := range 20000 {
		r := dutyRandomRatings(rng)
		if err := r.Validate(); err != nil {
			t.Fatalf("case %d: random ratings invalid: %v", i, err)
		}
		app := Application{
			Duty:         Duties()[rng.IntN(2)],
			AmbientC:     -30 + rng.Float64()*110,
			AltitudeM:    -100 + rng.Float64()*7000,
			CarrierKHz:   rng.Float64() * 25,
			SupplyPhases: []int{0, 1, 3}[rng.IntN(3)],
		}
		al, err := AllowedCurrent(r, app)
		if err != nil {
			t.Fatalf("case %d: %v", i, err)
		}
		// Every factor lies in [0, 1].
		for _, f := range al.Factors {
			if !(f.Value >= 0 && f.Value <= 1) {
				t.Fatalf("case %d: factor %s = %v outside [0, 1]", i, f.Name, f.Value)
			}
		}
		if !(al.AllowedA >= 0 && al.AllowedA <= al.RatedA) {
			t.Fatalf("case %d: allowed %v outside [0, rated %v]", i, al.AllowedA, al.RatedA)
		}
		// Allowed current never rises when ambient, altitude or carrier rises.
		for _, step := range []func(a *Application){
			func(a *Application) { a.AmbientC += rng.Float64() * 10 },
			func(a *Application) { a.AltitudeM += rng.Float64() * 800 },
			func(a *Application) {
				if a.CarrierKHz == 0 {
					a.CarrierKHz = r.DefaultCarrierKHz
				}
				a.CarrierKHz += rng.Float64() * 4
			},
		} {
			hotter := app
			step(&hotter)
			al2, err := AllowedCurrent(r, hotter)
			if err != nil {
				t.Fatalf("case %d: %v", i, err)
			}
			if al2.AllowedA > al.AllowedA+1e-9 {
				t.Fatalf("case %d: allowed rose from %v to %v going from %+v to %+v", i, al.AllowedA, al2.AllowedA, app, hotter)
			}
		}
	}
}

func BenchmarkAllowedCurrent(b *testing.B) {
	r := dutyTestRatings()
	app := Application{Duty: DutyNormal, AmbientC: 45, AltitudeM: 1500, CarrierKHz: 10, SupplyPhases: 3}
	for b.Loop() {
		if _, err := AllowedCurrent(r, app); err != nil {
			b.Fatal(err)
		}
	}
}
