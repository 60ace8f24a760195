package health

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func bandRank(b Band) int { return slices.Index(Bands(), b) }

func TestBandFor(t *testing.T) {
	for _, c := range []struct {
		r    float64
		want Band
	}{{0, BandSound}, {19.999, BandSound}, {20, BandWatch}, {39.9, BandWatch}, {40, BandPlan}, {59.99, BandPlan}, {60, BandUrgent}, {100, BandUrgent}} {
		if got := BandFor(c.r); got != c.want {
			t.Errorf("BandFor(%v) = %s, want %s", c.r, got, c.want)
		}
	}
}

// TestAssessRiskHandValues works the documented formula by hand.
func TestAssessRiskHandValues(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name   string
		in     RiskInput
		risk   float64
		health float64
		band   Band
	}{
		{"new drive, nothing known", RiskInput{CapacitorLifeUsed: nan, FanLifeUsed: nan, LowestDerateFactor: nan, Criticality: CriticalityA}, 0, 100, BandSound},
		// 0.5^3 = 0.125 → R 12.5.
		{"capacitors half used", RiskInput{CapacitorLifeUsed: 0.5, LowestDerateFactor: 1, Criticality: CriticalityA}, 12.5, 87.5, BandSound},
		// 0.9^3 = 0.729 → 72.9.
		{"capacitors 90 % used, A", RiskInput{CapacitorLifeUsed: 0.9, LowestDerateFactor: 1, Criticality: CriticalityA}, 72.9, 27.1, BandUrgent},
		// 0.8^3 = 0.512 → B: 51.2 × 0.8 = 40.96.
		{"capacitors 80 % used, B", RiskInput{CapacitorLifeUsed: 0.8, LowestDerateFactor: 1, Criticality: CriticalityB}, 40.96, 48.8, BandPlan},
		// One critical finding: D = 0.9; C: 90 × 0.6 = 54.
		{"one critical finding, C", RiskInput{Findings: FindingCounts{Critical: 1}, LowestDerateFactor: 1, Criticality: CriticalityC}, 54, 10, BandPlan},
		{"one critical finding, A", RiskInput{Findings: FindingCounts{Critical: 1}, LowestDerateFactor: 1, Criticality: CriticalityA}, 90, 10, BandUrgent},
		// One minor: 0.2 → A 20 (watch from 20).
		{"one minor finding, A", RiskInput{Findings: FindingCounts{Minor: 1}, LowestDerateFactor: 1}, 20, 80, BandWatch},
		// Single-phase derate 0.5: 0.3 → A 30.
		{"derated to 0.5", RiskInput{LowestDerateFactor: 0.5, Criticality: CriticalityA}, 30, 70, BandWatch},
		{"out of rating, C", RiskInput{LowestDerateFactor: 0.7, OutOfRating: true, Criticality: CriticalityC}, 60, 0, BandUrgent},
		{"factor 0 is out of rating", RiskInput{LowestDerateFactor: 0, Criticality: CriticalityA}, 100, 0, BandUrgent},
		// Noisy OR: capacitors 0.512 and fan 0.125: D = 1 - 0.488 × 0.875 = 0.573.
		{"capacitors 80 % and fan 50 %", RiskInput{CapacitorLifeUsed: 0.8, FanLifeUsed: 0.5, LowestDerateFactor: 1}, 57.3, 42.7, BandPlan},
		// Past end of life counts as end of life.
		{"capacitors 150 % used, C", RiskInput{CapacitorLifeUsed: 1.5, LowestDerateFactor: 1, Criticality: CriticalityC}, 60, 0, BandUrgent},
		{"unknown criticality reads as A", RiskInput{CapacitorLifeUsed: 0.9, LowestDerateFactor: 1, Criticality: "Z"}, 72.9, 27.1, BandUrgent},
	}
	for _, tc := range tests {
		a := AssessRisk(tc.in)
		if !near(a.RiskScore, tc.risk, 1e-9) || !near(a.HealthScore, tc.health, 1e-9) || a.Band != tc.band {
			t.Errorf("%s: risk %.4f health %.4f band %s; want %.4f, %.4f, %s", tc.name, a.RiskScore, a.HealthScore, a.Band, tc.risk, tc.health, tc.band)
		}
		if len(a.Contributions) != 4 {
			t.Errorf("%s: %d contributions", tc.name, len(a.Contributions))
		}
	}
}

func randomRiskInput(rng *rand.Rand) RiskInput {
	pick := func(p float64, v func() float64) float64 {
		if rng.Float64() < p {
			return math.NaN()
		}
		return v()
	}
	return RiskInput{
		CapacitorLifeUsed:  pick(0.1, func() float64 { return rng.Float64() * 1.4 }),
		FanLifeUsed:        pick(0.1, func() float64 { return rng.Float64() * 1.4 }),
		Findings:           FindingCounts{Critical: rng.IntN(2), Major: rng.IntN(3), Minor: rng.IntN(4), Advice: rng.IntN(6)},
		LowestDerateFactor: pick(0.1, func() float64 { return rng.Float64()*1.1 - 0.05 }),
		OutOfRating:        rng.IntN(8) == 0,
		Criticality:        Criticalities()[rng.IntN(3)],
	}
}

// worsen returns in with one input made worse, chosen by which.
func worsen(rng *rand.Rand, in RiskInput, which int) RiskInput {
	up := func(x float64) float64 {
		if math.IsNaN(x) {
			x = 0 // unknown read as no wear: any known value is no better
		}
		return x + rng.Float64()*0.6
	}
	switch which {
	case 0:
		in.CapacitorLifeUsed = up(in.CapacitorLifeUsed)
	case 1:
		in.FanLifeUsed = up(in.FanLifeUsed)
	case 2:
		in.Findings.Critical += rng.IntN(2) + 1
	case 3:
		in.Findings.Major += rng.IntN(2) + 1
	case 4:
		in.Findings.Minor += rng.IntN(3) + 1
	case 5:
		in.Findings.Advice += rng.IntN(3) + 1
	case 6:
		f := in.LowestDerateFactor
		if math.IsNaN(f) {
			f = 1
		}
		in.LowestDerateFactor = f - rng.Float64()*0.6
	case 7:
		in.OutOfRating = true
	case 8:
		switch in.Criticality {
		case CriticalityC:
			in.Criticality = []Criticality{CriticalityB, CriticalityA}[rng.IntN(2)]
		case CriticalityB:
			in.Criticality = CriticalityA
		}
	}
	return in
}

// TestAssessRiskMonotone: with seeded random inputs, worsening any one input
// never lowers the risk score or the band, and the scores stay in range.
func TestAssessRiskMonotone(t *testing.T) {
	rng := rand.New(rand.NewPCG(20240611, 1))
	for i := 0; i < 20000; i++ {
		in := randomRiskInput(rng)
		a := AssessRisk(in)
		if a.RiskScore < 0 || a.RiskScore > 100 || a.HealthScore < 0 || a.HealthScore > 100 || math.IsNaN(a.RiskScore) {
			t.Fatalf("out of range: %+v → %+v", in, a)
		}
		for which := 0; which <= 8; which++ {
			w := worsen(rng, in, which)
			b := AssessRisk(w)
			if b.RiskScore < a.RiskScore-1e-12 || bandRank(b.Band) < bandRank(a.Band) {
				t.Fatalf("worsening input %d lowered the risk: %+v (%.6f %s) → %+v (%.6f %s)", which, in, a.RiskScore, a.Band, w, b.RiskScore, b.Band)
			}
			if b.HealthScore > a.HealthScore+1e-12 && which != 8 {
				t.Fatalf("worsening input %d raised the health score", which)
			}
		}
	}
}

func TestCountFindings(t *testing.T) {
	got := CountFindings([]Finding{{Severity: SeverityCritical}, {Severity: SeverityMinor}, {Severity: SeverityMinor}, {Severity: "bogus"}, {Severity: SeverityAdvice}})
	if got != (FindingCounts{Critical: 1, Minor: 2, Advice: 1}) {
		t.Errorf("CountFindings = %+v", got)
	}
}

func TestRankByRisk(t *testing.T) {
	mk := func(key string, risk float64) RankedDrive {
		return RankedDrive{Key: key, Risk: RiskAssessment{RiskScore: risk}}
	}
	in := []RankedDrive{mk("D-7", 10), mk("B-2", 55), mk("A-9", 55), mk("C-1", 90), mk("E-5", 0)}
	orig := slices.Clone(in)
	got := RankByRisk(in)
	var keys []string
	for _, r := range got {
		keys = append(keys, r.Key)
	}
	if want := []string{"C-1", "A-9", "B-2", "D-7", "E-5"}; !slices.Equal(keys, want) {
		t.Errorf("order %v, want %v", keys, want)
	}
	for i := range in {
		if in[i].Key != orig[i].Key {
			t.Fatal("RankByRisk changed its input")
		}
	}
	if len(RankByRisk(nil)) != 0 {
		t.Error("empty input")
	}
}
