package health

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// This file holds the fleet's failure statistics: a two-parameter Weibull
// fit by maximum likelihood with right-censored data, probability plot
// points, and the forecasts drawn from a fit.
//
// Weibull model: R(t) = exp(-(t/η)^β), shape β > 0, scale η > 0 in hours.
// Censored likelihood (Lawless, Statistical Models and Methods for Lifetime
// Data; the form the NAG Library's g07be documents):
//
//	ℓ(β, η) = Σ_failures [ln β - β ln η + (β-1) ln t_i] - Σ_all (t_i/η)^β

// LifeRecord is one unit life for a Weibull fit: the age at which the unit
// failed (Failed), or the age at which it was last known not to have failed
// in the mode studied: still running, removed, or failed by another mode (a
// suspension, or right-censored observation).
type LifeRecord struct {
	AgeH   float64 `json:"age_h"`
	Failed bool    `json:"failed"`
}

// UnitHistory is one life of a physical unit as the register tells it: the
// age at failure with its failure mode, or the age at removal (or now) with
// no failure. A unit that is repaired and put back starts a new history.
type UnitHistory struct {
	Key    string      `json:"key"`
	AgeH   float64     `json:"age_h"`
	Failed bool        `json:"failed"`
	Mode   FailureMode `json:"mode,omitempty"`
}

// LifeRecords turns unit histories into failures and suspensions for one
// failure mode: a history that failed in mode is a failure; every other
// history, including failures in other modes, is a suspension at its age
// (competing modes treated as censoring, common practice in life data
// analysis). An empty mode counts every failure. The order of the histories
// is kept.
func LifeRecords(units []UnitHistory, mode FailureMode) []LifeRecord {
	out := make([]LifeRecord, len(units))
	for i, u := range units {
		out[i] = LifeRecord{AgeH: u.AgeH, Failed: u.Failed && (mode == "" || u.Mode == mode)}
	}
	return out
}

// Weibull is a two-parameter Weibull distribution of life in hours.
type Weibull struct {
	Shape float64 `json:"shape"`   // β
	Scale float64 `json:"scale_h"` // η, hours
}

// Reliability returns R(t) = exp(-(t/η)^β), the probability of surviving
// to age t hours. Validity: t >= 0, β > 0, η > 0.
func (w Weibull) Reliability(t float64) float64 {
	if t <= 0 {
		return 1
	}
	return math.Exp(-math.Pow(t/w.Scale, w.Shape))
}

// BLife returns the age by which a fraction p of units has failed:
// t_p = η (-ln(1-p))^(1/β); p = 0.10 gives the B10 life. Validity:
// 0 < p < 1.
func (w Weibull) BLife(p float64) float64 {
	return w.Scale * math.Pow(-math.Log1p(-p), 1/w.Shape)
}

// ConditionalFailure returns the probability that a unit that has survived
// to age t fails within the next Δ hours:
// 1 - R(t+Δ)/R(t) = 1 - exp((t/η)^β - ((t+Δ)/η)^β), computed with expm1 so
// that small probabilities keep their digits (standard reliability algebra).
// Validity: t >= 0, Δ >= 0.
func (w Weibull) ConditionalFailure(ageH, horizonH float64) float64 {
	if horizonH <= 0 {
		return 0
	}
	t := max(ageH, 0)
	h0 := math.Pow(t/w.Scale, w.Shape)
	h1 := math.Pow((t+horizonH)/w.Scale, w.Shape)
	return -math.Expm1(h0 - h1)
}

// ExpectedFailures returns the expected number of failures among running
// units of the given ages within the next horizon hours: the sum over units
// of ConditionalFailure(age, horizon) (expectation of a sum of Bernoulli
// variables). Validity: as ConditionalFailure; failed units are not in ages.
func (w Weibull) ExpectedFailures(agesH []float64, horizonH float64) float64 {
	sum := 0.0
	for _, a := range agesH {
		sum += w.ConditionalFailure(a, horizonH)
	}
	return sum
}

// WeibullStatus says whether a fit was made.
type WeibullStatus string

// Weibull statuses.
const (
	WeibullFitted       WeibullStatus = "fitted"
	WeibullInsufficient WeibullStatus = "insufficient_failures"
)

// WeibullOptions tunes FitWeibull. Zero values take the defaults.
type WeibullOptions struct {
	// MinFailures is the fewest failures a fit needs; fewer give an
	// insufficient-failures result. Default 3 (common practice: two points
	// fix a line but not its scatter).
	MinFailures int
	// Confidence is the two-sided confidence level of the bounds, between
	// 0 and 1. Default 0.90.
	Confidence float64
}

// Bounds is a two-sided confidence interval.
type Bounds struct {
	Lower float64 `json:"lower"`
	Upper float64 `json:"upper"`
}

// WeibullFit is a maximum-likelihood fit and its Fisher-matrix confidence
// bounds.
type WeibullFit struct {
	Weibull
	LogLikelihood float64 `json:"log_likelihood"` // ℓ at the estimate, times in hours
	B10H          float64 `json:"b10_h"`
	Confidence    float64 `json:"confidence"`
	ShapeBounds   Bounds  `json:"shape_bounds"`
	ScaleBounds   Bounds  `json:"scale_bounds_h"`
	B10Bounds     Bounds  `json:"b10_bounds_h"`
	// Covariance of (ln η, ln β) from the inverse observed information:
	// [Var ln η, Cov, Var ln β].
	VarLogScale      float64 `json:"var_log_scale"`
	CovLogScaleShape float64 `json:"cov_log_scale_shape"`
	VarLogShape      float64 `json:"var_log_shape"`
	Iterations       int     `json:"iterations"`
}

// WeibullResult is the outcome of FitWeibull: a fit, or an explicit
// insufficient-failures answer that carries the counts and no fit.
type WeibullResult struct {
	Status      WeibullStatus `json:"status"`
	Failures    int           `json:"failures"`
	Suspensions int           `json:"suspensions"`
	MinFailures int           `json:"min_failures"`
	Fit         *WeibullFit   `json:"fit,omitempty"`
}

// FitWeibull fits a two-parameter Weibull distribution by maximum
// likelihood to failures and right-censored suspensions.
//
// Method: for fixed β the likelihood is maximised by
// η(β) = (Σ_all t_i^β / r)^(1/β), r the number of failures; the shape
// solves the profile equation
//
//	g(β) = Σ t_i^β ln t_i / Σ t_i^β - 1/β - (1/r) Σ_failures ln t_i = 0,
//
// whose derivative is positive, so the root is unique (Lawless; Cohen 1965).
// It is found by Newton's method kept inside a bracket by bisection, with
// ages scaled by the largest so that t^β cannot overflow.
//
// Bounds are Fisher-matrix bounds at opt.Confidence (two-sided): the
// observed information of (ln η, ln β) is inverted and the bounds are
// exp(estimate ± z·se) in those logs (and for ln B10 by the delta method),
// z the standard normal quantile of (1+C)/2. They are symmetric in the logs
// and rest on large-sample normality: with few failures they are too
// narrow (likelihood-ratio bounds would be wider).
//
// Validity: ages finite and >= 0, failures at ages > 0; suspensions at age
// 0 carry no information and are ignored. The fit needs opt.MinFailures
// failures (otherwise Status is insufficient_failures, not an error) and
// some failure below the largest age (otherwise β has no finite estimate
// and an error is returned).
func FitWeibull(data []LifeRecord, opt WeibullOptions) (WeibullResult, error) {
	if opt.MinFailures <= 0 {
		opt.MinFailures = 3
	}
	if opt.Confidence == 0 {
		opt.Confidence = 0.90
	}
	if !(opt.Confidence > 0 && opt.Confidence < 1) {
		return WeibullResult{}, fmt.Errorf("weibull fit: confidence %v must lie between 0 and 1", opt.Confidence)
	}
	res := WeibullResult{MinFailures: opt.MinFailures}
	var ages []float64
	var failed []bool
	for i, d := range data {
		if math.IsNaN(d.AgeH) || math.IsInf(d.AgeH, 0) || d.AgeH < 0 {
			return WeibullResult{}, fmt.Errorf("weibull fit: record %d has age %v h", i, d.AgeH)
		}
		if d.Failed {
			if d.AgeH == 0 {
				return WeibullResult{}, fmt.Errorf("weibull fit: record %d failed at age 0 h", i)
			}
			res.Failures++
		} else {
			res.Suspensions++
			if d.AgeH == 0 {
				continue
			}
		}
		ages = append(ages, d.AgeH)
		failed = append(failed, d.Failed)
	}
	if res.Failures < opt.MinFailures {
		res.Status = WeibullInsufficient
		return res, nil
	}
	fit, err := fitWeibullMLE(ages, failed, res.Failures)
	if err != nil {
		return WeibullResult{}, err
	}
	fit.Confidence = opt.Confidence
	z := math.Sqrt2 * math.Erfinv(opt.Confidence)
	seB, seU := math.Sqrt(fit.VarLogShape), math.Sqrt(fit.VarLogScale)
	fit.ShapeBounds = Bounds{fit.Shape * math.Exp(-z*seB), fit.Shape * math.Exp(z*seB)}
	fit.ScaleBounds = Bounds{fit.Scale * math.Exp(-z*seU), fit.Scale * math.Exp(z*seU)}
	fit.B10H = fit.BLife(0.10)
	// ln B10 = u + k e^(-b), k = ln(-ln 0.9): gradient (1, -k/β).
	k := math.Log(-math.Log1p(-0.10))
	g := -k / fit.Shape
	v := fit.VarLogScale + g*g*fit.VarLogShape + 2*g*fit.CovLogScaleShape
	se := math.Sqrt(max(v, 0))
	fit.B10Bounds = Bounds{fit.B10H * math.Exp(-z*se), fit.B10H * math.Exp(z*se)}
	res.Status = WeibullFitted
	res.Fit = &fit
	return res, nil
}

// fitWeibullMLE solves the profile equation and computes the observed
// information. r is the number of failures.
func fitWeibullMLE(ages []float64, failed []bool, r int) (WeibullFit, error) {
	s := slices.Max(ages)
	lx := make([]float64, len(ages)) // ln(t/s) <= 0
	meanFail := 0.0
	for i, t := range ages {
		lx[i] = math.Log(t / s)
		if failed[i] {
			meanFail += lx[i]
		}
	}
	meanFail /= float64(r)
	if meanFail >= 0 {
		return WeibullFit{}, fmt.Errorf("weibull fit: every failure is at the largest age (%v h), so the shape has no finite estimate", s)
	}
	rf := float64(r)
	// sums returns Σx^β, Σx^β ln x, Σx^β (ln x)^2.
	sums := func(b float64) (a0, a1, a2 float64) {
		for _, l := range lx {
			e := math.Exp(b * l)
			a0 += e
			a1 += e * l
			a2 += e * l * l
		}
		return
	}
	gfun := func(b float64) (g, dg float64) {
		a0, a1, a2 := sums(b)
		g = a1/a0 - 1/b - meanFail
		dg = (a2*a0-a1*a1)/(a0*a0) + 1/(b*b)
		return
	}
	// Bracket the root: g rises from -inf at 0 to -meanFail > 0 at infinity.
	lo, hi := 1.0, 1.0
	for g, _ := gfun(lo); g > 0; g, _ = gfun(lo) {
		lo /= 2
		if lo < 1e-8 {
			return WeibullFit{}, fmt.Errorf("weibull fit: shape below 1e-8, data are degenerate")
		}
	}
	for g, _ := gfun(hi); g < 0; g, _ = gfun(hi) {
		hi *= 2
		if hi > 1e6 {
			return WeibullFit{}, fmt.Errorf("weibull fit: shape above 1e6, failures too tightly clustered")
		}
	}
	b := (lo + hi) / 2
	if lo == hi {
		b = lo
		lo /= 2
		hi *= 2
	}
	iter := 0
	for ; iter < 200; iter++ {
		g, dg := gfun(b)
		if g == 0 {
			break
		}
		if g < 0 {
			lo = b
		} else {
			hi = b
		}
		next := b - g/dg
		if !(next > lo && next < hi) {
			next = (lo + hi) / 2
		}
		done := math.Abs(next-b) <= 1e-13*b
		b = next
		if done {
			break
		}
	}
	a0, _, _ := sums(b)
	ux := math.Log(a0/rf) / b // ln(η/s)
	u := ux + math.Log(s)
	var sumLogFail float64
	for i, t := range ages {
		if failed[i] {
			sumLogFail += math.Log(t)
		}
	}
	// Σ (t/η)^β equals r at the estimate.
	ll := rf*math.Log(b) - rf*b*u + (b-1)*sumLogFail - rf

	// Observed information of (u = ln η, β), with w = ln t - u, z = e^(βw).
	var sz, swz, sw2z, swFail float64
	for i, l := range lx {
		w := l - ux
		z := math.Exp(b * w)
		sz += z
		swz += w * z
		sw2z += w * w * z
		if failed[i] {
			swFail += w
		}
	}
	huu := -b * b * sz
	hub := -rf + sz + b*swz
	hbb := -rf/(b*b) - sw2z
	gradB := rf/b + swFail - swz // zero at the estimate, kept for exactness
	// Change to (u, ln β): H_ub' = β H_uβ, H_b'b' = β² H_ββ + β ∂ℓ/∂β.
	hub *= b
	hbb = b*b*hbb + b*gradB
	// Covariance = inverse of the information -H.
	iuu, iub, ibb := -huu, -hub, -hbb
	det := iuu*ibb - iub*iub
	if !(det > 0) {
		return WeibullFit{}, fmt.Errorf("weibull fit: information matrix is not positive definite (det %v)", det)
	}
	return WeibullFit{
		Weibull:          Weibull{Shape: b, Scale: math.Exp(u)},
		LogLikelihood:    ll,
		VarLogScale:      ibb / det,
		CovLogScaleShape: -iub / det,
		VarLogShape:      iuu / det,
		Iterations:       iter + 1,
	}, nil
}

// WeibullLogLikelihood returns the censored log-likelihood ℓ(β, η) of the
// data (formula at the top of this file), times in hours. It lets a caller
// compare fits or profile the likelihood. Validity: β > 0, η > 0, failures
// at ages > 0.
func WeibullLogLikelihood(data []LifeRecord, w Weibull) float64 {
	ll := 0.0
	lb, le := math.Log(w.Shape), math.Log(w.Scale)
	for _, d := range data {
		if d.AgeH <= 0 && !d.Failed {
			continue
		}
		if d.Failed {
			ll += lb - w.Shape*le + (w.Shape-1)*math.Log(d.AgeH)
		}
		ll -= math.Pow(d.AgeH/w.Scale, w.Shape)
	}
	return ll
}

// PlotPoint is one failure on a Weibull probability plot.
type PlotPoint struct {
	AgeH float64 `json:"age_h"`
	// Rank is the mean order number: the failure's plain rank when there
	// are no suspensions, Johnson's adjusted rank otherwise.
	Rank float64 `json:"rank"`
	// MedianRank is Benard's approximation (Rank - 0.3)/(n + 0.4).
	MedianRank float64 `json:"median_rank"`
	// X and Y are Weibull paper coordinates: ln t and ln(-ln(1 - F)).
	X float64 `json:"x"`
	Y float64 `json:"y"`
}

// MedianRanks returns probability plot points for the failures in data,
// oldest last. Records are sorted by age, failures before suspensions at
// equal ages (common practice). Johnson's adjusted rank of each failure is
//
//	rank_j = rank_(j-1) + (n + 1 - rank_(j-1)) / (1 + reverse rank),
//
// reverse rank = n - position + 1 in the sorted list, rank_0 = 0 (Johnson,
// The Statistical Treatment of Fatigue Experiments, 1964); without
// suspensions it equals the plain order number. The median rank is Benard's
// (rank - 0.3)/(n + 0.4) (Benard and Bos-Levenbach, 1953). Validity: n >= 1
// records; failures at ages > 0 for X.
func MedianRanks(data []LifeRecord) []PlotPoint {
	sorted := slices.Clone(data)
	slices.SortStableFunc(sorted, func(a, b LifeRecord) int {
		if c := cmp.Compare(a.AgeH, b.AgeH); c != 0 {
			return c
		}
		switch {
		case a.Failed && !b.Failed:
			return -1
		case !a.Failed && b.Failed:
			return 1
		}
		return 0
	})
	n := float64(len(sorted))
	var out []PlotPoint
	prev := 0.0
	for i, d := range sorted {
		if !d.Failed {
			continue
		}
		reverse := n - float64(i)
		rank := prev + (n+1-prev)/(1+reverse)
		prev = rank
		f := (rank - 0.3) / (n + 0.4)
		out = append(out, PlotPoint{AgeH: d.AgeH, Rank: rank, MedianRank: f,
			X: math.Log(d.AgeH), Y: math.Log(-math.Log1p(-f))})
	}
	return out
}
