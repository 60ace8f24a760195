package health

import (
	"cmp"
	"math"
	"slices"
)

// This file scores a drive's condition and the risk it poses at its
// position. The formula is kelvard's own (common practice in spirit: risk
// as condition times consequence, with ABC criticality); no published source
// sets these weights, and each is documented on AssessRisk.

// FindingCounts counts a drive's open findings by severity.
type FindingCounts struct {
	Critical int `json:"critical"`
	Major    int `json:"major"`
	Minor    int `json:"minor"`
	Advice   int `json:"advice"`
}

// CountFindings counts findings by severity; unknown severities are not
// counted. The caller passes only open findings.
func CountFindings(findings []Finding) FindingCounts {
	var c FindingCounts
	for _, f := range findings {
		switch f.Severity {
		case SeverityCritical:
			c.Critical++
		case SeverityMajor:
			c.Major++
		case SeverityMinor:
			c.Minor++
		case SeverityAdvice:
			c.Advice++
		}
	}
	return c
}

// RiskInput is what the risk score of one drive depends on.
type RiskInput struct {
	// CapacitorLifeUsed and FanLifeUsed are fractions of life used (1 = end
	// of life; may exceed 1). NaN when unknown.
	CapacitorLifeUsed float64 `json:"capacitor_life_used_fraction"`
	FanLifeUsed       float64 `json:"fan_life_used_fraction"`
	// Findings counts the drive's open findings.
	Findings FindingCounts `json:"findings"`
	// LowestDerateFactor is the smallest derate factor applied to the
	// drive's rated current (1 = none). NaN when unknown; 0 or less means out
	// of rating.
	LowestDerateFactor float64 `json:"lowest_derate_factor"`
	// OutOfRating is true when the drive runs outside its rating (a factor
	// of 0: ambient above the maximum, for example).
	OutOfRating bool `json:"out_of_rating"`
	// Criticality of the position; empty or unknown is read as A.
	Criticality Criticality `json:"criticality"`
}

// RiskContribution is the badness (0 to 1) one input adds to the
// condition.
type RiskContribution struct {
	Input   string  `json:"input"`
	Badness float64 `json:"badness"`
}

// RiskAssessment is the health and risk of one drive.
type RiskAssessment struct {
	// HealthScore is 100 for a drive in new condition down to 0.
	HealthScore float64 `json:"health_score"`
	// RiskScore is 0 to 100; higher is worse.
	RiskScore float64 `json:"risk_score"`
	Band      Band    `json:"health_band"`
	// Condition is the combined badness D, 0 to 1.
	Condition float64 `json:"condition"`
	// Consequence is the criticality weight.
	Consequence   float64            `json:"consequence"`
	Contributions []RiskContribution `json:"contributions"`
}

// Risk band thresholds on the risk score: below 20 sound, below 40 watch,
// below 60 plan, 60 and above urgent.
const (
	RiskWatchFrom  = 20.0
	RiskPlanFrom   = 40.0
	RiskUrgentFrom = 60.0
)

// BandFor returns the band of a risk score: sound below 20, watch from 20,
// plan from 40, urgent from 60 (kelvard's thresholds; see AssessRisk).
func BandFor(risk float64) Band {
	switch {
	case risk >= RiskUrgentFrom:
		return BandUrgent
	case risk >= RiskPlanFrom:
		return BandPlan
	case risk >= RiskWatchFrom:
		return BandWatch
	}
	return BandSound
}

// criticalityWeight is the consequence weight of a position.
func criticalityWeight(c Criticality) float64 {
	switch c {
	case CriticalityB:
		return 0.8
	case CriticalityC:
		return 0.6
	}
	return 1.0
}

func clamp01(x float64) float64 {
	if math.IsNaN(x) {
		return 0
	}
	return math.Min(math.Max(x, 0), 1)
}

// AssessRisk scores a drive. Each input becomes a badness b in [0, 1]:
//
//	capacitor  b = min(max(used, 0), 1)^3  (half life used 0.125, 80 % 0.512,
//	           90 % 0.729, end of life 1)
//	fan        the same with fan life used
//	findings   b = 1 - 0.1^critical × 0.5^major × 0.8^minor × 0.95^advice
//	           (one critical 0.9, one major 0.5, one minor 0.2, one advice
//	           0.05; more findings push towards 1)
//	derating   b = 1 when out of rating (flag, or factor <= 0), else
//	           0.3 × min(max((1 - factor)/0.5, 0), 1) (a factor of 0.5 or
//	           less 0.3; unknown or 1 gives 0)
//
// They combine as independent causes (a noisy OR): condition
// D = 1 - Π(1 - b), health score H = 100 (1 - D). The consequence weight
// is 1.0 for criticality A (and unknown), 0.8 for B, 0.6 for C, and the
// risk score is R = 100 × D × weight. Band: below 20 sound, below 40 watch,
// below 60 plan, 60 and above urgent (scores rounded to 6 decimals before
// banding), except that a drive with any open finding above advice is at
// least watch, so an open problem never reads as sound; so one critical
// finding makes an A
// or B drive urgent and a C drive plan, and capacitors at 90 % of life make
// an A drive urgent. NaN life fractions count as no wear.
//
// R is monotone non-decreasing in each worsening input: more life used,
// more findings of any severity, a lower derate factor, the out-of-rating
// flag, and a more critical position (C to B to A). Validity: any input;
// the score lies in [0, 100].
func AssessRisk(in RiskInput) RiskAssessment {
	cubed := func(x float64) float64 { x = clamp01(x); return x * x * x }
	capB := cubed(in.CapacitorLifeUsed)
	fanB := cubed(in.FanLifeUsed)
	f := in.Findings
	find := 1 - math.Pow(0.1, float64(max(f.Critical, 0)))*math.Pow(0.5, float64(max(f.Major, 0)))*
		math.Pow(0.8, float64(max(f.Minor, 0)))*math.Pow(0.95, float64(max(f.Advice, 0)))
	der := 0.0
	switch {
	case in.OutOfRating || in.LowestDerateFactor <= 0:
		der = 1
	case !math.IsNaN(in.LowestDerateFactor):
		der = 0.3 * clamp01((1-in.LowestDerateFactor)/0.5)
	}
	contrib := []RiskContribution{
		{Input: "capacitor_life", Badness: capB},
		{Input: "fan_life", Badness: fanB},
		{Input: "open_findings", Badness: find},
		{Input: "derating", Badness: der},
	}
	good := 1.0
	for _, c := range contrib {
		good *= 1 - c.Badness
	}
	d := clamp01(1 - good)
	w := criticalityWeight(in.Criticality)
	// Rounding to 6 decimals is monotone and lets boundary values such as
	// one minor finding (100 × (1 - 0.8) = 20) band as documented.
	round6 := func(x float64) float64 { return math.Round(x*1e6) / 1e6 }
	r := round6(math.Min(100*d*w, 100))
	band := BandFor(r)
	if band == BandSound && f.Critical+f.Major+f.Minor > 0 {
		band = BandWatch
	}
	return RiskAssessment{
		HealthScore:   round6(100 * (1 - d)),
		RiskScore:     r,
		Band:          band,
		Condition:     d,
		Consequence:   w,
		Contributions: contrib,
	}
}

// RankedDrive pairs a stable key (a drive serial, say) with its risk.
type RankedDrive struct {
	Key  string         `json:"key"`
	Risk RiskAssessment `json:"risk"`
}

// RankByRisk returns a copy of items sorted by risk score, highest first,
// ties broken by key in ascending order so the order is reproducible. The
// input is not changed.
func RankByRisk(items []RankedDrive) []RankedDrive {
	out := slices.Clone(items)
	slices.SortStableFunc(out, func(a, b RankedDrive) int {
		if c := cmp.Compare(b.Risk.RiskScore, a.Risk.RiskScore); c != 0 {
			return c
		}
		return cmp.Compare(a.Key, b.Key)
	})
	return out
}
