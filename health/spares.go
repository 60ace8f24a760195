package health

import (
	"fmt"
	"math"
)

// SparesPlan says how many spares to hold over a replenishment lead time and
// how the spares on hand compare.
type SparesPlan struct {
	// ExpectedDemand is λ, the expected number of failures during the lead
	// time.
	ExpectedDemand float64 `json:"expected_demand"`
	// ServiceLevel is the target probability that demand during the lead
	// time does not exceed the spares held.
	ServiceLevel float64 `json:"service_level_fraction"`
	// Hold is the smallest s with P(N <= s) >= ServiceLevel.
	Hold int `json:"hold"`
	// HoldLevel is P(N <= Hold), at least ServiceLevel.
	HoldLevel float64 `json:"hold_level_fraction"`
	// OnHand is the number of usable spares in stores.
	OnHand int `json:"on_hand"`
	// OnHandLevel is P(N <= OnHand): the service level the stores give now.
	OnHandLevel float64 `json:"on_hand_level_fraction"`
	// Shortfall is max(0, Hold - OnHand).
	Shortfall int `json:"shortfall"`
}

// PoissonCDF returns P(N <= k) for N ~ Poisson(λ):
// Σ_{i=0..k} e^-λ λ^i / i!, each term formed in logarithms
// (-λ + i ln λ - ln i!) so that large λ does not underflow e^-λ (standard
// probability; checked against gonum's distuv.Poisson). Validity: λ >= 0
// and finite; k < 0 gives 0.
func PoissonCDF(k int, lambda float64) float64 {
	if k < 0 {
		return 0
	}
	if lambda == 0 {
		return 1
	}
	sum := 0.0
	for i := 0; i <= k; i++ {
		term := poissonPMF(i, lambda)
		sum += term
		if float64(i) > lambda && term < 1e-18*sum {
			break // the rest of the tail is below rounding
		}
	}
	return min(sum, 1)
}

func poissonPMF(i int, lambda float64) float64 {
	lg, _ := math.Lgamma(float64(i) + 1)
	return math.Exp(-lambda + float64(i)*math.Log(lambda) - lg)
}

// SparesToHold sizes the spares to hold over a replenishment lead time at
// a service level, with demand N ~ Poisson(λ): the smallest s such that
// P(N <= s) >= level (the Poisson spares model, common practice for
// repairable spares). λ is the expected number of failures in the lead
// time, for a Weibull fleet the sum over running units of the conditional
// probability of failing within the lead time (Weibull.ExpectedFailures);
// that sum ignores failures of the replacements themselves, which is fair
// while the lead time is short against the units' lives. The plan also
// reports the shortfall against the spares on hand and the service level
// they give now. Validity: λ >= 0 and finite, 0 < level < 1, onHand >= 0.
func SparesToHold(expectedDemand, level float64, onHand int) (SparesPlan, error) {
	if !(expectedDemand >= 0) || math.IsInf(expectedDemand, 0) {
		return SparesPlan{}, fmt.Errorf("spares to hold: expected demand %v must be a finite number >= 0", expectedDemand)
	}
	if !(level > 0 && level < 1) {
		return SparesPlan{}, fmt.Errorf("spares to hold: service level %v must lie between 0 and 1", level)
	}
	if onHand < 0 {
		return SparesPlan{}, fmt.Errorf("spares to hold: %d spares on hand is negative", onHand)
	}
	p := SparesPlan{ExpectedDemand: expectedDemand, ServiceLevel: level, OnHand: onHand}
	if expectedDemand == 0 {
		p.HoldLevel, p.OnHandLevel = 1, 1
		return p, nil
	}
	// Walk up the distribution, adding one term at a time. The loop ends:
	// the CDF tends to 1 > level. The cap guards against rounding leaving
	// the sum just short of a level very close to 1.
	limit := int(expectedDemand+40*math.Sqrt(expectedDemand)) + 50
	cdf := 0.0
	s := 0
	for ; ; s++ {
		cdf += poissonPMF(s, expectedDemand)
		if cdf >= level || s >= limit {
			break
		}
	}
	p.Hold, p.HoldLevel = s, min(cdf, 1)
	p.OnHandLevel = PoissonCDF(onHand, expectedDemand)
	p.Shortfall = max(0, p.Hold-onHand)
	return p, nil
}
