package demo

import (
	"math"
	"testing"

	"kelvard/store"
)

// TestTenDegreeRule holds the generator's capacitor life to the check
// values of the 10-degree rule in capacitor makers' application notes
// (DESIGN.md section 3): 2000 h at 105 °C gives 32 000 h at 65 °C, 5000 h
// at 105 °C gives 80 000 h at 65 °C; a part rated with ripple lasts exactly
// its rated life at the reference core temperature T0 + dT_rated.
func TestTenDegreeRule(t *testing.T) {
	t.Parallel()
	noRipple := func(l0 float64) store.CapacitorSpec {
		return store.CapacitorSpec{RatedLifeH: l0, RatedTempC: 105}
	}
	withRipple := store.CapacitorSpec{RatedLifeH: 5000, RatedTempC: 105, RatingIncludesRipple: true, RippleRiseC: 5}
	cases := []struct {
		name  string
		spec  store.CapacitorSpec
		coreC float64
		want  float64
	}{
		{"2000 h part at 65 °C", noRipple(2000), 65, 32000},
		{"5000 h part at 65 °C", noRipple(5000), 65, 80000},
		{"at the rated temperature, no ripple term", noRipple(5000), 105, 5000},
		{"rated with ripple, at Tref = 110 °C", withRipple, 110, 5000},
		{"rated with ripple, 10 K below Tref", withRipple, 100, 10000},
	}
	for _, c := range cases {
		if got := capacitorLifeH(c.spec, c.coreC); math.Abs(got-c.want) > 1e-9*c.want {
			t.Errorf("%s: L = %v h, want %v h", c.name, got, c.want)
		}
	}
	// Core = air + dT_rated × (I / I_rated)²: at rated ripple the core is
	// 5 K above the air (capacitor makers' life formulas).
	if got := capacitorCoreC(withRipple, 105, 1); got != 110 {
		t.Errorf("core at rated ripple and 105 °C air = %v, want 110", got)
	}
	if got := capacitorCoreC(withRipple, 60, 0.5); got != 61.25 {
		t.Errorf("core at half ripple and 60 °C air = %v, want 61.25", got)
	}
}

// TestFanHalvingRule checks the fan life rule (common practice, DESIGN.md
// section 3): L10 at the reference temperature, halving every interval
// hotter and doubling every interval cooler.
func TestFanHalvingRule(t *testing.T) {
	t.Parallel()
	spec := store.FanSpec{L10H: 40000, RefTempC: 60, HalvingInterval: 10}
	for _, c := range []struct{ airC, want float64 }{{60, 40000}, {70, 20000}, {50, 80000}, {75, 40000 / math.Pow(2, 1.5)}} {
		if got := fanLifeH(spec, c.airC); math.Abs(got-c.want) > 1e-9*c.want {
			t.Errorf("fan life at %v °C = %v h, want %v h", c.airC, got, c.want)
		}
	}
}
