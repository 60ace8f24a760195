package health

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat"
)

// This file judges the duty a drive actually carries against its allowed
// current: utilisation from logged running current, short overloads from the
// per-interval peak current, and overload trips from events.

// DutyParams are the thresholds of the duty rules. Every field has a default
// in DefaultDutyParams.
type DutyParams struct {
	// Derating holds the thresholds of DeratingFindings.
	Derating DeratingParams `json:"derating"`
	// Percentile of running current used for utilisation, in (0, 1].
	Percentile float64 `json:"percentile"`
	// UtilisationMajor: utilisation above it is derating.utilisation_high, major.
	UtilisationMajor float64 `json:"utilisation_major_fraction"`
	// UtilisationAdvice: utilisation above it (up to UtilisationMajor) is advice.
	UtilisationAdvice float64 `json:"utilisation_advice_fraction"`
	// MinRunningSamples: fewer running samples give no utilisation finding.
	MinRunningSamples int `json:"min_running_samples"`
	// OverloadPeaksMin: this many intervals with a peak above the overload
	// allowance raise derating.overload_peak.
	OverloadPeaksMin int `json:"overload_peaks_min"`
	// TripWindowS is the window, ending at the assessment time, over which
	// overload trips are counted.
	TripWindowS int64 `json:"trip_window_s"`
	// OverloadTripsMin trips in the window raise derating.overload_trips
	// (minor); OverloadTripsMajor or more make it major.
	OverloadTripsMin   int `json:"overload_trips_min"`
	OverloadTripsMajor int `json:"overload_trips_major"`
}

// DefaultDutyParams returns kelvard's defaults: the 95th percentile of
// running current (a high percentile, DESIGN.md section 3); utilisation above
// 1.0 major and above 0.9 advice (kelvard's choice: 10 % headroom is common
// practice when sizing drives); at least 24 running samples (a day of hourly
// readings); one interval above the overload allowance; overload trips
// counted over 30 days, one trip minor and three or more major (kelvard's
// choice).
func DefaultDutyParams() DutyParams {
	return DutyParams{
		Derating:           DefaultDeratingParams(),
		Percentile:         0.95,
		UtilisationMajor:   1.0,
		UtilisationAdvice:  0.9,
		MinRunningSamples:  24,
		OverloadPeaksMin:   1,
		TripWindowS:        30 * 24 * 3600,
		OverloadTripsMin:   1,
		OverloadTripsMajor: 3,
	}
}

// Validate reports a parameter set that cannot work.
func (p DutyParams) Validate() error {
	switch {
	case !(p.Percentile > 0 && p.Percentile <= 1):
		return fmt.Errorf("duty parameters: percentile %v must lie in (0, 1]", p.Percentile)
	case !(p.UtilisationAdvice > 0 && p.UtilisationAdvice <= p.UtilisationMajor):
		return fmt.Errorf("duty parameters: need 0 < utilisation_advice_fraction (%v) <= utilisation_major_fraction (%v)", p.UtilisationAdvice, p.UtilisationMajor)
	case p.MinRunningSamples < 1 || p.OverloadPeaksMin < 1 || p.OverloadTripsMin < 1:
		return fmt.Errorf("duty parameters: sample and event counts must be at least 1")
	case p.OverloadTripsMajor < p.OverloadTripsMin:
		return fmt.Errorf("duty parameters: overload_trips_major (%d) below overload_trips_min (%d)", p.OverloadTripsMajor, p.OverloadTripsMin)
	case p.TripWindowS <= 0:
		return fmt.Errorf("duty parameters: trip_window_s must be positive")
	}
	return nil
}

// RunningCurrentQuantile returns the p-quantile of the mean output current
// over the samples in which the drive runs (Sample.Running), and how many
// samples it used. Samples with a NaN, infinite or negative current are left
// out, so the result is never negative. With no usable sample it returns NaN
// and 0.
//
// Estimator: gonum stat.Quantile with stat.LinInterp, the linear
// interpolation of the empirical distribution function with F(x_(i)) = i/n
// (definition 4 of Hyndman and Fan, "Sample quantiles in statistical
// packages", 1996): for n = 100 and p = 0.95 it is the 95th smallest value.
// Valid for any p in [0, 1].
func RunningCurrentQuantile(samples []Sample, p float64) (amps float64, n int) {
	x := make([]float64, 0, len(samples))
	for _, s := range samples {
		if s.Running() && s.CurrentA >= 0 && !math.IsInf(s.CurrentA, 0) {
			x = append(x, s.CurrentA)
		}
	}
	if len(x) == 0 {
		return math.NaN(), 0
	}
	slices.Sort(x)
	return stat.Quantile(p, stat.LinInterp, x, nil), len(x)
}

// Utilisation is how much of its allowed current a drive uses.
type Utilisation struct {
	Percentile     float64 `json:"percentile"`
	CurrentA       float64 `json:"current_a"`
	AllowedA       float64 `json:"allowed_a"`
	Fraction       float64 `json:"utilisation_fraction"`
	RunningSamples int     `json:"running_samples"`
	// Defined is false when there is no running sample or no allowed
	// current (out of rating); CurrentA and Fraction are then NaN or
	// meaningless.
	Defined bool `json:"defined"`
}

// UtilisationOf computes
//
//	u = Q_p(I_running) / I_allowed
//
// with Q_p the p-quantile from RunningCurrentQuantile (default p = 0.95,
// DESIGN.md section 3: "a high percentile of logged running current"). u is
// never negative and may exceed 1. The samples are the window the caller
// chooses (for example the last 30 days). Valid for allowedA > 0; with
// allowedA <= 0 (out of rating) or no running sample the result is not
// Defined. p outside [0, 1] is an error.
func UtilisationOf(samples []Sample, allowedA, p float64) (Utilisation, error) {
	if !(p >= 0 && p <= 1) {
		return Utilisation{}, fmt.Errorf("utilisation: percentile %v outside [0, 1]", p)
	}
	q, n := RunningCurrentQuantile(samples, p)
	u := Utilisation{Percentile: p, CurrentA: q, AllowedA: allowedA, RunningSamples: n, Fraction: math.NaN()}
	if n > 0 && allowedA > 0 && !math.IsInf(allowedA, 0) {
		u.Fraction = q / allowedA
		u.Defined = true
	}
	return u, nil
}

// OverloadPeaks summarises the per-interval peak currents against the duty
// class's short-time overload.
type OverloadPeaks struct {
	LimitA    float64 `json:"limit_a"`
	Intervals int     `json:"intervals"`
	Over      int     `json:"over"`
	WorstA    float64 `json:"worst_a"`
	WorstAt   int64   `json:"worst_at"`
}

// OverloadPeaksOf counts the intervals whose peak current exceeds the
// overload the duty class allows:
//
//	I_peak > k_overload × I_allowed
//
// with k_overload 1.10 (normal duty) or 1.50 (heavy duty) for 60 s every
// 600 s (common practice) and I_allowed the derated continuous current
// (makers scale the overload with the derated current; common practice).
// Hourly means cannot show a 60-second overload, so only the logged peak
// (Sample.PeakCurrentA) catches it; samples without a peak are skipped.
// A peak above the limit means the drive was pushed past its short-time
// rating (or tripped). Valid for allowedA > 0; with allowedA <= 0 nothing is
// counted.
func OverloadPeaksOf(samples []Sample, allowedA float64, ol OverloadAllowance) OverloadPeaks {
	out := OverloadPeaks{LimitA: ol.Fraction * allowedA, WorstA: math.NaN()}
	if !(allowedA > 0) {
		return out
	}
	for _, s := range samples {
		if math.IsNaN(s.PeakCurrentA) {
			continue
		}
		out.Intervals++
		if s.PeakCurrentA > out.LimitA {
			out.Over++
			if math.IsNaN(out.WorstA) || s.PeakCurrentA > out.WorstA {
				out.WorstA, out.WorstAt = s.PeakCurrentA, s.At
			}
		}
	}
	return out
}

// CountTrips counts trip events of the given cause with fromAt < At <= toAt
// (Unix seconds). Events need not be sorted. A pure count; no source needed.
func CountTrips(events []Event, cause TripCause, fromAt, toAt int64) int {
	n := 0
	for _, e := range events {
		if e.Type == EventTrip && e.Cause == cause && e.At > fromAt && e.At <= toAt {
			n++
		}
	}
	return n
}

// DutyInput is everything AssessDuty judges.
type DutyInput struct {
	Ratings     Ratings
	Application Application
	// DesignAmbientMaxC is the area's design maximum for a drive in the
	// open room; NaN for a drive in a cabinet (see DeratingFindings).
	DesignAmbientMaxC float64
	// Samples is the window of readings to judge (for example 30 days).
	Samples []Sample
	// Events are the position's events; trips are counted over
	// DutyParams.TripWindowS ending at At.
	Events []Event
	// At is the assessment time, Unix seconds.
	At int64
}

// DutyAssessment is the result of AssessDuty.
type DutyAssessment struct {
	Allowance     Allowance     `json:"allowance"`
	Utilisation   Utilisation   `json:"utilisation"`
	Peaks         OverloadPeaks `json:"peaks"`
	OverloadTrips int           `json:"overload_trips"`
	Findings      []Finding     `json:"findings"`
}

// AssessDuty derates the drive (AllowedCurrent), judges the application
// (DeratingFindings), and the logged duty against the allowed current:
//
//   - derating.carrier (major): the carrier is above the model's default and
//     utilisation at the derated current exceeds UtilisationMajor;
//   - derating.utilisation_high: utilisation above UtilisationMajor (major)
//     or above UtilisationAdvice (advice). When derating.carrier is raised,
//     utilisation_high is raised as well only if the drive would be over
//     UtilisationMajor even at the default carrier, so the carrier alone is
//     not reported twice;
//   - derating.overload_peak (major): OverloadPeaksMin or more intervals
//     with a peak above the overload allowance (OverloadPeaksOf);
//   - derating.overload_trips: overload trips in the window (minor; major
//     from OverloadTripsMajor).
//
// Sources: common practice (DESIGN.md section 3) for the derating and duty
// classes; the thresholds are kelvard defaults, configurable. Valid for
// ratings that pass Validate and samples of one drive at one position.
func AssessDuty(in DutyInput, p DutyParams) (DutyAssessment, error) {
	if err := p.Validate(); err != nil {
		return DutyAssessment{}, err
	}
	al, err := AllowedCurrent(in.Ratings, in.Application)
	if err != nil {
		return DutyAssessment{}, fmt.Errorf("assess duty: %w", err)
	}
	out := DutyAssessment{Allowance: al}
	out.Findings = DeratingFindings(in.Ratings, in.Application, al, in.DesignAmbientMaxC, p.Derating)
	out.Utilisation, err = UtilisationOf(in.Samples, al.AllowedA, p.Percentile)
	if err != nil {
		return DutyAssessment{}, fmt.Errorf("assess duty: %w", err)
	}
	u := out.Utilisation
	if u.Defined && u.RunningSamples >= p.MinRunningSamples {
		out.Findings = append(out.Findings, utilisationFindings(al, u, p)...)
	}

	out.Peaks = OverloadPeaksOf(in.Samples, al.AllowedA, al.Overload)
	if out.Peaks.Over >= p.OverloadPeaksMin {
		pk := out.Peaks
		out.Findings = append(out.Findings, drFinding(dutyRules, "derating.overload_peak", SeverityMajor,
			fmt.Sprintf("In %d of %d logged intervals the peak current exceeded the %s-duty overload of %.0f %% of the allowed current (%.1f A); the worst peak was %.1f A.",
				pk.Over, pk.Intervals, al.Duty, 100*al.Overload.Fraction, pk.LimitA, pk.WorstA),
			[]Evidence{
				{Name: "intervals with a peak above the overload allowance", Value: pk.Over, Limit: p.OverloadPeaksMin, Source: "kelvard default, configurable"},
				{Name: "worst peak current", Value: pk.WorstA, Unit: "A", Limit: pk.LimitA, Source: dutySrcDutyClass},
				{Name: "worst peak at (Unix s)", Value: pk.WorstAt},
				{Name: "allowed continuous current", Value: al.AllowedA, Unit: "A"},
				{Name: "overload allowance", Value: al.Overload.Fraction, Unit: "fraction", Limit: fmt.Sprintf("%.0f s every %.0f s", al.Overload.DurationS, al.Overload.EveryS), Source: dutySrcDutyClass},
			}, true))
	}

	out.OverloadTrips = CountTrips(in.Events, TripOverload, in.At-p.TripWindowS, in.At)
	if n := out.OverloadTrips; n >= p.OverloadTripsMin {
		sev := SeverityMinor
		if n >= p.OverloadTripsMajor {
			sev = SeverityMajor
		}
		days := float64(p.TripWindowS) / 86400
		out.Findings = append(out.Findings, drFinding(dutyRules, "derating.overload_trips", sev,
			fmt.Sprintf("The drive tripped on overload %d time(s) in the last %.0f days.", n, days),
			[]Evidence{
				{Name: "overload trips in the window", Value: n, Limit: p.OverloadTripsMin, Source: "kelvard default, configurable"},
				{Name: "trips from which severity is major", Value: n, Limit: p.OverloadTripsMajor, Source: "kelvard default, configurable"},
				{Name: "window", Value: days, Unit: "d"},
			}, true))
	}
	return out, nil
}

// utilisationFindings raises derating.carrier and derating.utilisation_high.
func utilisationFindings(al Allowance, u Utilisation, p DutyParams) []Finding {
	var out []Finding
	car, _ := al.Factor(FactorCarrier)
	atDefault := u.Fraction * car.Value // utilisation if the carrier were at the default
	carrier := car.Value < 1 && car.Value > 0 && u.Fraction > p.UtilisationMajor
	if carrier {
		out = append(out, drFinding(dutyRules, "derating.carrier", SeverityMajor,
			fmt.Sprintf("The carrier is set to %.1f kHz, above the model's default; derated to %.0f %% for it, the drive may carry %.1f A, and its %.0fth-percentile running current of %.1f A is %.0f %% of that.",
				car.Input, 100*car.Value, al.AllowedA, 100*u.Percentile, u.CurrentA, 100*u.Fraction),
			[]Evidence{
				{Name: "carrier frequency", Value: car.Input, Unit: "kHz", Source: car.Source},
				{Name: "carrier derate factor", Value: car.Value, Unit: "fraction"},
				{Name: "utilisation at the set carrier", Value: u.Fraction, Unit: "fraction", Limit: p.UtilisationMajor, Source: "kelvard default, configurable"},
				{Name: "utilisation at the default carrier", Value: atDefault, Unit: "fraction"},
			}, false))
	}
	sev := Severity("")
	switch {
	case u.Fraction > p.UtilisationMajor && (!carrier || atDefault > p.UtilisationMajor):
		sev = SeverityMajor
	case u.Fraction > p.UtilisationAdvice && !carrier:
		sev = SeverityAdvice
	}
	if sev != "" {
		limit := p.UtilisationAdvice
		if sev == SeverityMajor {
			limit = p.UtilisationMajor
		}
		out = append(out, drFinding(dutyRules, "derating.utilisation_high", sev,
			fmt.Sprintf("The %.0fth percentile of running current, %.1f A, is %.0f %% of the %.1f A the drive may carry continuously here.",
				100*u.Percentile, u.CurrentA, 100*u.Fraction, al.AllowedA),
			[]Evidence{
				{Name: "utilisation", Value: u.Fraction, Unit: "fraction", Limit: limit, Source: "kelvard default, configurable"},
				{Name: fmt.Sprintf("running current, %.0fth percentile", 100*u.Percentile), Value: u.CurrentA, Unit: "A"},
				{Name: "allowed continuous current", Value: al.AllowedA, Unit: "A", Source: "rated current × derate factors (common practice)"},
				{Name: "running samples", Value: u.RunningSamples, Limit: p.MinRunningSamples},
			}, sev == SeverityMajor))
	}
	return out
}

// dutyRules lists the rules this file raises.
var dutyRules = []RuleInfo{
	{ID: "derating.carrier", Kind: KindDerating, Title: "Carrier frequency above the model's default overloads the derated drive",
		Remedy: "Lower the carrier frequency towards the model's default (weigh motor noise and cable length), or fit a drive whose derated current at this carrier covers the load."},
	{ID: "derating.utilisation_high", Kind: KindDerating, Title: "Running current high against the allowed current",
		Remedy: "Check the load and process duty; lower the load, improve the cooling to lift the derate, or fit a larger drive or a heavy-duty rating."},
	{ID: "derating.overload_peak", Kind: KindDerating, Title: "Peak current above the duty class's overload allowance",
		Remedy: "Find what drives the peaks (starts, jams, ramps too short); lengthen acceleration ramps, apply the heavy-duty rating if the drive has one, or fit a larger drive."},
	{ID: "derating.overload_trips", Kind: KindDerating, Title: "Overload trips",
		Remedy: "Review the trip log against the process; check the mechanical load and motor, lengthen ramps, and resize the drive if the duty needs more than its overload allows."},
}
