package health

import (
	"math"
	"slices"
	"strings"
	"testing"
)

func TestCatalogueIsConsistent(t *testing.T) {
	seen := map[string]bool{}
	for _, r := range Catalogue() {
		if seen[r.ID] {
			t.Errorf("rule %s listed twice", r.ID)
		}
		seen[r.ID] = true
		if !r.Kind.Valid() {
			t.Errorf("rule %s has kind %q", r.ID, r.Kind)
		}
		if !strings.Contains(r.ID, ".") || strings.ToLower(r.ID) != r.ID {
			t.Errorf("rule id %q is not a lower-case dotted id", r.ID)
		}
		if r.Title == "" || r.Remedy == "" {
			t.Errorf("rule %s lacks a title or remedy", r.ID)
		}
		if got, ok := Rule(r.ID); !ok || got != r {
			t.Errorf("Rule(%s) = %v, %v", r.ID, got, ok)
		}
	}
	if len(seen) < 30 {
		t.Errorf("catalogue holds %d rules; every model's rules should be there", len(seen))
	}
}

// cleanInput is an installed drive with nothing wrong: indoor, clean air,
// a suitable enclosure, light load and a healthy bus.
func cleanInput(t *testing.T) DriveInput {
	t.Helper()
	r := DefaultRatings(400)
	r.NormalDutyA, r.HeavyDutyA, r.NormalDutyKW, r.HeavyDutyKW = 32, 27, 15, 11
	enc, err := ParseEnclosure("12", "IP54")
	if err != nil {
		t.Fatal(err)
	}
	at := int64(1_767_225_600) // 2026-01-01T00:00:00Z
	window := make([]Sample, 0, 24*60)
	capSpec, fanSpec := DefaultCapacitorSpec(), DefaultFanSpec()
	capSpec.RippleRefCurrentA = r.NormalDutyA
	var cs CapacitorState
	var fs FanState
	for i := 24 * 60; i > 0; i-- {
		wave := math.Sin(2 * math.Pi * float64(i%24) / 24)
		s := Sample{At: at - int64(i)*3600, InternalAirC: 32 + 2*wave, AmbientC: 24 + 3*wave, HeatsinkC: 38 + 3*wave + 0.01*float64(i%7),
			CurrentA: 18 + 0.1*float64(i%5), PeakCurrentA: 20, FrequencyHz: 45, BusV: 1.35 * 400 * (1 + 0.001*float64(i%3)),
			BusRippleV: 6 + 0.01*float64(i%4), CapacitanceUF: math.NaN(), ESRMilliohm: math.NaN()}
		window = append(window, s)
	}
	p := DefaultDriveParams()
	var err2 error
	if cs, _, err2 = AccumulateCapacitor(capSpec, p.Capacitor, cs, window, LifeAirInputs{}); err2 != nil {
		t.Fatal(err2)
	}
	if fs, _, err2 = AccumulateFan(fanSpec, p.Fan, fs, window, LifeAirInputs{}); err2 != nil {
		t.Fatal(err2)
	}
	return DriveInput{
		At: at,
		Position: &PositionInput{
			Criticality: CriticalityB,
			Environment: Environment{Location: Indoor, Sun: SunNone, AmbientMinC: 10, AmbientMaxC: 30, Water: WaterNone,
				Dust: DustNone, Oil: OilNone, Corrosion: CorrosionG1},
			Housing:       Housing{Enclosure: enc, Mounting: MountingOwn, BoardsCoated: true},
			Application:   Application{Duty: DutyNormal, AltitudeM: 100, CarrierKHz: 4, SupplyPhases: 3},
			SupplyLineV:   400,
			LastReadingAt: window[len(window)-1].At,
			HasReadings:   true,
		},
		Ratings: r, Capacitor: capSpec, Fan: fanSpec,
		CapacitorState: cs, FanState: fs,
		Window: window, Params: p,
	}
}

func rules(fs []Finding) []string {
	var out []string
	for _, f := range fs {
		out = append(out, f.Rule)
	}
	return out
}

func TestAssessDriveClean(t *testing.T) {
	in := cleanInput(t)
	a, err := AssessDrive(in)
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Findings) != 0 {
		t.Errorf("a clean drive has findings %v", rules(a.Findings))
	}
	if a.Risk.Band != BandSound {
		t.Errorf("a clean drive is %s (risk %.1f)", a.Risk.Band, a.Risk.RiskScore)
	}
	if a.Allowance == nil || a.Allowance.AllowedA != 32 || a.Duty == nil || a.DCBus == nil || a.Heatsink == nil {
		t.Errorf("parts missing: allowance %+v", a.Allowance)
	}
	if !(a.Capacitor.LifeUsedFraction > 0) || !(a.Fan.LifeUsedFraction > 0) {
		t.Errorf("life not reported: capacitor %v fan %v", a.Capacitor.LifeUsedFraction, a.Fan.LifeUsedFraction)
	}
	for _, id := range []string{"enclosure.water", "derating.carrier", "dc_bus.ripple_rising", "data_quality.silent", "capacitor.end_of_life"} {
		if !slices.Contains(a.Evaluated, id) {
			t.Errorf("%s not evaluated", id)
		}
	}
}

func TestAssessDriveCarriesWindowFindings(t *testing.T) {
	in := cleanInput(t)
	ripple := Finding{Rule: "dc_bus.ripple_rising", Kind: KindDCBus, Severity: SeverityMinor}
	water := Finding{Rule: "enclosure.water", Kind: KindEnclosure, Severity: SeverityMajor}
	in.Previous = []Finding{ripple, water}
	in.Window = nil
	a, err := AssessDrive(in)
	if err != nil {
		t.Fatal(err)
	}
	// The ripple check did not run, so its finding is carried; the
	// enclosure check ran and found nothing, so its finding cleared.
	if got := rules(a.Findings); !slices.Equal(got, []string{"dc_bus.ripple_rising"}) {
		t.Errorf("findings %v, want only the carried ripple finding", got)
	}
	if slices.Contains(a.Evaluated, "dc_bus.ripple_rising") {
		t.Error("ripple reported as evaluated without a window")
	}
	// Suppressed findings do not count toward risk.
	withRisk := a.Risk.RiskScore
	in.Suppressed = []string{"dc_bus.ripple_rising"}
	b, _ := AssessDrive(in)
	if b.Risk.RiskScore > withRisk {
		t.Errorf("suppressing a finding raised the risk from %v to %v", withRisk, b.Risk.RiskScore)
	}
}

func TestAssessDriveStored(t *testing.T) {
	in := cleanInput(t)
	in.Previous = []Finding{{Rule: "enclosure.water", Kind: KindEnclosure, Severity: SeverityMajor}}
	in.Position = nil
	in.Window = nil
	in.LastEnergisedAt = in.At - 3*365*86400 // three years unpowered
	a, err := AssessDrive(in)
	if err != nil {
		t.Fatal(err)
	}
	got := rules(a.Findings)
	if !slices.Contains(got, "storage.reform_required") || slices.Contains(got, "enclosure.water") {
		t.Errorf("stored drive findings %v: want reform, no position finding", got)
	}
	if a.Enclosure != nil || a.Allowance != nil {
		t.Error("position checks ran on a stored drive")
	}
}

func TestAssessDriveFindsPlantedFaults(t *testing.T) {
	for _, c := range []struct {
		name   string
		change func(*DriveInput)
		want   string
	}{
		{"indoor enclosure outdoors", func(in *DriveInput) {
			in.Position.Environment.Location, in.Position.Environment.Sun = Outdoor, SunFull
			in.Position.Housing.Enclosure = Enclosure{NEMA: "1"}
		}, "enclosure.outdoor"},
		{"hose-down hall", func(in *DriveInput) {
			in.Position.Environment.Water = WaterHoseDown
			in.Position.Housing.Enclosure, _ = ParseEnclosure("", "IP20")
		}, "enclosure.water"},
		{"uncoated boards at G3", func(in *DriveInput) {
			in.Position.Environment.Corrosion = CorrosionG3
			in.Position.Housing.BoardsCoated = false
		}, "environment.board_corrosion"},
		{"single phase without derate", func(in *DriveInput) { in.Position.Application.SupplyPhases = 1 }, "derating.single_phase_supply"},
		{"silent", func(in *DriveInput) { in.At += 5 * 86400; in.Window = nil }, "data_quality.silent"},
	} {
		t.Run(c.name, func(t *testing.T) {
			in := cleanInput(t)
			c.change(&in)
			a, err := AssessDrive(in)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Contains(rules(a.Findings), c.want) {
				t.Errorf("findings %v lack %s", rules(a.Findings), c.want)
			}
			if a.Risk.Band == BandSound {
				t.Errorf("band %s with %s", a.Risk.Band, c.want)
			}
		})
	}
}

func TestWithUnobserved(t *testing.T) {
	// Palmgren–Miner with the unseen service charged at the observed rate
	// (DESIGN.md section 3): D = 0.1 + 10 000 h × 1e-5 /h = 0.2, and the
	// remaining life from the last reading is (1 − 0.2) / 1e-5 = 80 000 h.
	r := LifeReport{LifeUsedFraction: 0.1, LifeUsedAtAssessmentFraction: 0.1, DamageRatePerH: 1e-5, LastAt: 1_000_000}
	got := r.WithUnobserved(10000, 1)
	if math.Abs(got.LifeUsedFraction-0.2) > 1e-12 || math.Abs(got.RemainingH-80000) > 1e-6 || got.UnobservedRatePerH != 1e-5 {
		t.Errorf("with unobserved: %+v", got)
	}
	if got.EndOfLifeAt != 1_000_000+80000*3600 {
		t.Errorf("end of life at %d", got.EndOfLifeAt)
	}
	// No observed rate: the fallback rate is used.
	none := LifeReport{LastAt: 100}.WithUnobserved(1000, 2e-4)
	if math.Abs(none.LifeUsedFraction-0.2) > 1e-12 || none.UnobservedRatePerH != 2e-4 {
		t.Errorf("fallback: %+v", none)
	}
	// Past the end: reached (1.5 − 1)/1e-4 = 5000 h before the last reading.
	past := LifeReport{LifeUsedFraction: 0.5, LifeUsedAtAssessmentFraction: 0.5, DamageRatePerH: 1e-4, LastAt: 36_000_000}.WithUnobserved(10000, 0)
	if !past.EndReached || past.EndReachedAt != 36_000_000-5000*3600 || past.RemainingH != 0 {
		t.Errorf("past the end: %+v", past)
	}
}
