package demo

import (
	"math"
	"slices"
	"testing"
	"time"

	"kelvard/health"
)

// TestCleanPositions checks the clean positions: at least six, each
// indoors in mild dry air (no salt, G1 for at least six of them), a
// suitable enclosure with coated boards, no cabinet, utilisation well under
// 0.9 whatever window or ambient the assessment takes, a healthy bus and
// steady readings, and not one finding from the health models.
func TestCleanPositions(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	ex := expected(t)
	g1 := 0
	for _, tg := range ex.Clean {
		pos, _ := s.Position(tg)
		a, _ := s.AreaOf(pos)
		d, _ := s.InstalledDrive(tg)
		m, _ := s.Model(d.Model)
		e := a.Environment
		if e.Location != health.Indoor || e.SaltAir || pos.Mounting != health.MountingOwn || !m.ConformalCoating ||
			pos.CarrierKHz != m.DefaultCarrierKHz || pos.SupplyPhases != 3 {
			t.Errorf("%s is listed clean but is not indoor, salt-free, own enclosure, coated, default carrier, three-phase", tg)
		}
		if e.Corrosion == health.CorrosionG1 {
			g1++
		}
		if fs := judge(t, s, tg).Findings; len(fs) != 0 {
			t.Errorf("%s: JudgeEnclosure raises %v", tg, rules(fs))
		}
		fs, err := s.PositionFindings(tg)
		if err != nil {
			t.Fatal(err)
		}
		if len(fs) != 0 {
			t.Errorf("%s: the health models raise %v", tg, rules(fs))
		}
		// Utilisation at the design maximum and at the hottest logged
		// ambient, over a month, a quarter and the year.
		samples := Samples(s.PositionReadings(tg))
		hottest := math.Inf(-1)
		for _, sm := range samples {
			hottest = math.Max(hottest, sm.AmbientC)
		}
		for _, win := range []time.Duration{30 * 24 * time.Hour, 90 * 24 * time.Hour, 365 * 24 * time.Hour} {
			for _, air := range []float64{e.AmbientMaxC, hottest} {
				if u := duty(t, s, tg, win, air).Utilisation; !u.Defined || u.Fraction >= 0.85 {
					t.Errorf("%s: utilisation %.2f over %v at %.1f °C, want well under 0.9", tg, u.Fraction, win, air)
				}
			}
		}
	}
	if len(ex.Clean) < 6 || g1 < 6 {
		t.Errorf("%d clean positions, %d of them at G1: want at least 6 of each", len(ex.Clean), g1)
	}
	// Every planted position has a finding, so none is listed clean.
	for _, pl := range s.Planted {
		if slices.Contains(ex.Clean, pl.Subject) {
			t.Errorf("planted %s listed clean", pl.Subject)
		}
	}
}

// TestDutyFindingsHoldForAnyWindow checks that the derating and DC-bus
// findings of every position do not hang on the window of readings the
// assessment will choose: the same rules are raised over the last 30 days,
// 90 days and the whole year, and at the design maximum ambient or the
// hottest logged one for drives in their own enclosure.
func TestDutyFindingsHoldForAnyWindow(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	for _, p := range s.plans {
		tg := p.row.Tag
		if p.row.Mounting == health.MountingCabinet {
			continue // the cabinet air comes from AssessCabinet, see PositionFindings
		}
		design := p.area.row.Environment.AmbientMaxC
		base := rules(duty(t, s, tg, 30*24*time.Hour, design).Findings)
		for _, win := range []time.Duration{90 * 24 * time.Hour, 365 * 24 * time.Hour} {
			if got := rules(duty(t, s, tg, win, design).Findings); !slices.Equal(got, base) {
				t.Errorf("%s: over %v the duty rules are %v, over 30 days %v", tg, win, got, base)
			}
		}
		hottest := math.Inf(-1)
		for _, r := range s.PositionReadings(tg) {
			hottest = math.Max(hottest, r.AmbientC)
		}
		got := rules(duty(t, s, tg, 30*24*time.Hour, math.Min(hottest, design)).Findings)
		if !slices.Equal(got, base) {
			t.Errorf("%s: at the logged %.1f °C the duty rules are %v, at the design %.1f °C %v", tg, hottest, got, design, base)
		}
	}
}
