package health

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

// This file checks a drive's DC bus: its voltage against what the supply
// should give, its ripple against load over time, and over-voltage trips
// when the drive decelerates.

// Sources quoted in evidence.
const (
	dutySrcBusVoltage = "power electronics handbooks: DC bus ≈ √2 × line voltage at light load, ≈ 1.35 × line voltage (3√2/π) averaged under load for a six-pulse rectifier"
	dutySrcBusRipple  = "common practice: ripple grows with load; ageing capacitors and a lost supply phase (ripple moves from 6× to 2× line frequency) enlarge it at the same load"
	dutySrcRegen      = "common practice: energy returned by a decelerating or overhauling load cannot flow back through a diode rectifier and raises the bus until an over-voltage trip"
)

// SixPulseMeanFactor is 3√2/π ≈ 1.3505, the mean output of a six-pulse
// diode bridge as a multiple of the line-to-line RMS voltage (power
// electronics handbooks round it to 1.35).
const SixPulseMeanFactor = 3 * math.Sqrt2 / math.Pi

// DCBusParams are the thresholds of the DC-bus rules. Every field has a
// default in DefaultDCBusParams.
type DCBusParams struct {
	// LightLoadFraction: at or below this output current (as a fraction of
	// rated) the bus is expected at √2 × line voltage.
	LightLoadFraction float64 `json:"light_load_fraction"`
	// FullLoadFraction: at or above it the bus is expected at 3√2/π × line
	// voltage; linear in between.
	FullLoadFraction float64 `json:"full_load_fraction"`
	// DeviationFraction: a median bus voltage further than this from the
	// expected value raises dc_bus.voltage_deviation (minor; major past twice it).
	DeviationFraction float64 `json:"deviation_fraction"`
	// DeviationWindowS is the window judged for the deviation, ending at the assessment time.
	DeviationWindowS int64 `json:"deviation_window_s"`
	// DeviationMinSamples: fewer bus readings in the window give no deviation finding.
	DeviationMinSamples int `json:"deviation_min_samples"`
	// RippleWindowS is the window over which the ripple trend is fitted.
	RippleWindowS int64 `json:"ripple_window_s"`
	// RippleMinLoadFraction: samples below this load are left out of the
	// ripple fit (ripple at light load is small and noisy).
	RippleMinLoadFraction float64 `json:"ripple_min_load_fraction"`
	// RippleMinSamples and RippleMinSpanS: the fit needs this many samples
	// spread over at least this time.
	RippleMinSamples int   `json:"ripple_min_samples"`
	RippleMinSpanS   int64 `json:"ripple_min_span_s"`
	// RippleRiseFraction: ripple at constant load rising by more than this
	// share over the window raises dc_bus.ripple_rising (minor; major past twice it).
	RippleRiseFraction float64 `json:"ripple_rise_fraction"`
	// TripWindowS is the window over which over-voltage trips and readings
	// near the trip threshold are counted.
	TripWindowS int64 `json:"trip_window_s"`
	// NearTripFraction: a bus reading at or above this share of the model's
	// trip threshold counts as near the trip.
	NearTripFraction float64 `json:"near_trip_fraction"`
}

// DefaultDCBusParams returns kelvard's defaults: light load at or below
// 10 % of rated current and full load at 100 % (from memory: the bus falls
// from the peak value towards the six-pulse mean as load rises); a 10 %
// deviation (from memory, DESIGN.md section 3) judged on the median over 7
// days with at least 24 readings; the ripple trend over 90 days from samples
// at 20 % load or more, at least 48 of them over at least 14 days, rising by
// 25 % at constant load; over-voltage trips over 90 days; near the trip
// from 95 % of the threshold (kelvard's choices, configurable).
func DefaultDCBusParams() DCBusParams {
	const day = 86400
	return DCBusParams{
		LightLoadFraction:     0.10,
		FullLoadFraction:      1.0,
		DeviationFraction:     0.10,
		DeviationWindowS:      7 * day,
		DeviationMinSamples:   24,
		RippleWindowS:         90 * day,
		RippleMinLoadFraction: 0.20,
		RippleMinSamples:      48,
		RippleMinSpanS:        14 * day,
		RippleRiseFraction:    0.25,
		TripWindowS:           90 * day,
		NearTripFraction:      0.95,
	}
}

// Validate reports a parameter set that cannot work.
func (p DCBusParams) Validate() error {
	switch {
	case !(p.LightLoadFraction >= 0 && p.FullLoadFraction > p.LightLoadFraction):
		return fmt.Errorf("dc bus parameters: need 0 <= light_load_fraction (%v) < full_load_fraction (%v)", p.LightLoadFraction, p.FullLoadFraction)
	case !(p.DeviationFraction > 0) || !(p.RippleRiseFraction > 0):
		return errors.New("dc bus parameters: deviation_fraction and ripple_rise_fraction must be above 0")
	case !(p.NearTripFraction > 0 && p.NearTripFraction <= 1):
		return fmt.Errorf("dc bus parameters: near_trip_fraction %v must lie in (0, 1]", p.NearTripFraction)
	case p.DeviationWindowS <= 0 || p.RippleWindowS <= 0 || p.TripWindowS <= 0 || p.RippleMinSpanS < 0:
		return errors.New("dc bus parameters: windows must be positive")
	case p.DeviationMinSamples < 1 || p.RippleMinSamples < 4:
		return errors.New("dc bus parameters: deviation_min_samples must be at least 1 and ripple_min_samples at least 4")
	}
	return nil
}

// ExpectedBusV returns the DC-bus voltage a diode-rectifier drive should
// show on a supply of lineV (line-to-line RMS) at output current
// loadFraction of rated:
//
//	V_dc = √2 × V_line                     x <= x_light
//	V_dc = 3√2/π × V_line (≈ 1.35 V_line)  x >= x_full
//	linear in x between
//
// (power electronics handbooks for the two ends: 480 V gives 679 V at light
// load and 648 V under load; the straight line between them is kelvard's
// simplification, from memory). Valid for six-pulse diode front ends on a
// balanced three-phase supply; active front ends hold a set bus voltage
// instead. A single-phase supply also gives √2 × V at light load but sags
// further under load.
func ExpectedBusV(lineV, loadFraction float64, p DCBusParams) float64 {
	x := math.Abs(loadFraction)
	switch {
	case x <= p.LightLoadFraction:
		return math.Sqrt2 * lineV
	case x >= p.FullLoadFraction:
		return SixPulseMeanFactor * lineV
	}
	t := (x - p.LightLoadFraction) / (p.FullLoadFraction - p.LightLoadFraction)
	return lineV * (math.Sqrt2 + t*(SixPulseMeanFactor-math.Sqrt2))
}

// BusDeviation is the bus voltage against its expected value over a window.
type BusDeviation struct {
	Samples int `json:"samples"`
	// MedianFraction is the median of (V_bus - V_expected) / V_expected.
	MedianFraction float64 `json:"median_fraction"`
	// MedianBusV is the median bus reading.
	MedianBusV float64 `json:"median_bus_v"`
}

// BusDeviationOf returns the median relative deviation
//
//	d = median((V_bus,i - V_exp(x_i)) / V_exp(x_i))
//
// over the samples with a bus reading and a current, V_exp from ExpectedBusV
// at x_i = I_i / ratedA (a stopped drive counts as light load). Readings
// below half of √2 × lineV are taken as a drive powered down or discharging
// and left out. The median keeps single spikes from deciding. NaN with no
// usable sample. Valid for diode front ends (see ExpectedBusV).
func BusDeviationOf(samples []Sample, lineV, ratedA float64, p DCBusParams) BusDeviation {
	var dev, bus []float64
	for _, s := range samples {
		if math.IsNaN(s.BusV) || s.BusV < 0.5*math.Sqrt2*lineV {
			continue
		}
		x := 0.0
		if s.Running() {
			if math.IsNaN(s.CurrentA) {
				continue
			}
			x = s.CurrentA / ratedA
		}
		e := ExpectedBusV(lineV, x, p)
		dev = append(dev, (s.BusV-e)/e)
		bus = append(bus, s.BusV)
	}
	if len(dev) == 0 {
		return BusDeviation{MedianFraction: math.NaN(), MedianBusV: math.NaN()}
	}
	slices.Sort(dev)
	slices.Sort(bus)
	return BusDeviation{Samples: len(dev), MedianFraction: stat.Quantile(0.5, stat.LinInterp, dev, nil), MedianBusV: stat.Quantile(0.5, stat.LinInterp, bus, nil)}
}

// RippleMethod names how a ripple trend was fitted.
type RippleMethod string

// Ripple trend methods.
const (
	// RippleLoadAndTime: ripple = b0 + b1·x + b2·t by least squares.
	RippleLoadAndTime RippleMethod = "load_and_time"
	// RippleTimeOnly: the load hardly varied; ripple = b0 + b2·t.
	RippleTimeOnly RippleMethod = "time_only"
	// RipplePerLoad: load and time rose together, so their effects cannot
	// be told apart; ripple / x = c0 + c2·t instead.
	RipplePerLoad RippleMethod = "ripple_per_load"
)

// RippleTrend is the fit of bus ripple against load and time.
type RippleTrend struct {
	Samples int   `json:"samples"`
	SpanS   int64 `json:"span_s"`
	// Fitted is false when there were too few samples or too short a span.
	Fitted bool         `json:"fitted"`
	Method RippleMethod `json:"method"`
	// InterceptV, PerLoadV and PerDayV are the coefficients of
	// ripple = InterceptV + PerLoadV·x + PerDayV·days (for RipplePerLoad
	// the ratio fit scaled to the mean load, PerLoadV left 0).
	InterceptV float64 `json:"intercept_v"`
	PerLoadV   float64 `json:"per_load_v"`
	PerDayV    float64 `json:"per_day_v"`
	// MeanLoadFraction is the mean load of the samples fitted.
	MeanLoadFraction float64 `json:"mean_load_fraction"`
	// StartV is the fitted ripple at the mean load at the start of the window.
	StartV float64 `json:"start_v"`
	// RiseFraction is PerDayV × span / StartV: how much the ripple at
	// constant load grew over the window.
	RiseFraction float64 `json:"rise_fraction"`
}

// RippleTrendOf fits, over the running samples with fromAt < At <= toAt, a
// ripple reading and load x = I / ratedA >= RippleMinLoadFraction, by least
// squares
//
//	ripple = b0 + b1·x + b2·t          (t in days from the first sample)
//
// and reports b2 as the ripple trend at constant load and
//
//	rise = b2 × span / (b0 + b1·x̄)
//
// the share by which the ripple at the mean load grew over the span. Fitting
// load and time together is what tells ripple rising because the load rose
// (b1, no trend) from ripple rising at the same load (b2): ageing capacitors
// or a lost phase (common practice). When the load hardly varies (range
// under 0.05) the load term is dropped (RippleTimeOnly). When load and time
// are nearly collinear (|correlation| above 0.95) the two cannot be told
// apart and the load-normalised ripple/x is fitted against time instead
// (RipplePerLoad): ripple that follows a rising load keeps ripple/x level or
// falling. Solved with gonum's QR least squares (mat.VecDense.SolveVec) and
// stat.LinearRegression. Valid for a linear ripple-load relation over the
// window's load range; not Fitted with fewer than RippleMinSamples samples
// or a span under RippleMinSpanS.
func RippleTrendOf(samples []Sample, ratedA float64, fromAt, toAt int64, p DCBusParams) RippleTrend {
	var xs, ts, ys []float64
	var first, last int64
	for _, s := range samples {
		if s.At <= fromAt || s.At > toAt || !s.Running() || math.IsNaN(s.BusRippleV) || math.IsNaN(s.CurrentA) {
			continue
		}
		x := s.CurrentA / ratedA
		if x < p.RippleMinLoadFraction {
			continue
		}
		if len(xs) == 0 || s.At < first {
			first = s.At
		}
		if len(xs) == 0 || s.At > last {
			last = s.At
		}
		xs, ts, ys = append(xs, x), append(ts, float64(s.At)), append(ys, s.BusRippleV)
	}
	out := RippleTrend{Samples: len(xs), SpanS: last - first}
	if len(xs) < p.RippleMinSamples || out.SpanS < p.RippleMinSpanS || out.SpanS <= 0 {
		return out
	}
	for i := range ts {
		ts[i] = (ts[i] - float64(first)) / 86400
	}
	out.MeanLoadFraction = stat.Mean(xs, nil)
	lo, hi := slices.Min(xs), slices.Max(xs)
	switch {
	case hi-lo < 0.05:
		out.Method = RippleTimeOnly
		b0, b2 := stat.LinearRegression(ts, ys, nil, false)
		out.InterceptV, out.PerDayV = b0, b2
	case math.Abs(stat.Correlation(xs, ts, nil)) > 0.95:
		out.Method = RipplePerLoad
		r := make([]float64, len(ys))
		for i := range ys {
			r[i] = ys[i] / xs[i]
		}
		c0, c2 := stat.LinearRegression(ts, r, nil, false)
		out.InterceptV, out.PerDayV = c0*out.MeanLoadFraction, c2*out.MeanLoadFraction
	default:
		out.Method = RippleLoadAndTime
		n := len(xs)
		design := mat.NewDense(n, 3, nil)
		for i := range n {
			design.Set(i, 0, 1)
			design.Set(i, 1, xs[i])
			design.Set(i, 2, ts[i])
		}
		var beta mat.VecDense
		if err := beta.SolveVec(design, mat.NewVecDense(n, ys)); err != nil {
			var cond mat.Condition
			if !errors.As(err, &cond) {
				return out // singular: no trend can be told apart
			}
		}
		out.InterceptV, out.PerLoadV, out.PerDayV = beta.AtVec(0), beta.AtVec(1), beta.AtVec(2)
	}
	out.Fitted = true
	out.StartV = out.InterceptV
	if out.Method == RippleLoadAndTime {
		out.StartV += out.PerLoadV * out.MeanLoadFraction
	}
	if out.StartV <= 0 {
		out.StartV = stat.Mean(ys, nil)
	}
	out.RiseFraction = out.PerDayV * float64(out.SpanS) / 86400 / out.StartV
	return out
}

// TripOnDeceleration tells whether a trip happened while the drive was
// decelerating: from the event's State when it is known; when it is not,
// from the output frequency falling between the last two samples at or
// before the trip (samples must be sorted by At). how says which evidence decided.
// A pure classification; the frequency rule is kelvard's (common practice:
// a falling output frequency is a deceleration).
func TripOnDeceleration(e Event, samples []Sample) (decelerating bool, how string) {
	if e.State != StateUnknown {
		return e.State == StateDecelerating, "event state " + string(e.State)
	}
	i := sort.Search(len(samples), func(i int) bool { return samples[i].At > e.At }) - 1
	if i < 1 {
		return false, "state unknown and no samples before the trip"
	}
	f0, f1 := samples[i-1].FrequencyHz, samples[i].FrequencyHz
	if math.IsNaN(f0) || math.IsNaN(f1) {
		return false, "state unknown and output frequency not logged"
	}
	if f1 < f0 {
		return true, fmt.Sprintf("output frequency falling from %.1f Hz to %.1f Hz before the trip", f0, f1)
	}
	return false, "output frequency not falling before the trip"
}

// DCBusInput is everything AssessDCBus judges.
type DCBusInput struct {
	Ratings Ratings
	Duty    Duty
	// SupplyLineV is the measured or nominal supply line voltage at the
	// position; 0 for the model's voltage class.
	SupplyLineV float64
	// Samples sorted by At; Events in any order.
	Samples []Sample
	Events  []Event
	// At is the assessment time, Unix seconds.
	At int64
}

// DCBusAssessment is the result of AssessDCBus.
type DCBusAssessment struct {
	ExpectedLightLoadV float64      `json:"expected_light_load_v"`
	Deviation          BusDeviation `json:"deviation"`
	Ripple             RippleTrend  `json:"ripple"`
	OverVoltageTrips   int          `json:"over_voltage_trips"`
	DecelerationTrips  int          `json:"deceleration_trips"`
	NearTripReadings   int          `json:"near_trip_readings"`
	MaxBusV            float64      `json:"max_bus_v"`
	Findings           []Finding    `json:"findings"`
}

// AssessDCBus raises:
//
//   - dc_bus.voltage_deviation: BusDeviationOf over DeviationWindowS beyond
//     ±DeviationFraction (10 % default, from memory); minor, major past
//     twice it;
//   - dc_bus.ripple_rising: RippleTrendOf over RippleWindowS with a rise
//     above RippleRiseFraction at constant load; minor, major past twice it;
//   - dc_bus.overvoltage_on_deceleration (major): over-voltage trips in
//     TripWindowS while decelerating (TripOnDeceleration); readings near the
//     trip threshold are added as evidence;
//   - dc_bus.near_overvoltage_trip (minor): no such trip, but bus readings
//     at or above NearTripFraction of the model's trip threshold (roughly
//     800-830 V DC for the 400/480 V class, from memory).
//
// Sources as the functions named. Valid for diode front-end drives.
func AssessDCBus(in DCBusInput, p DCBusParams) (DCBusAssessment, error) {
	if err := p.Validate(); err != nil {
		return DCBusAssessment{}, err
	}
	ratedA := in.Ratings.Rated(in.Duty).RatedA
	if !(ratedA > 0) {
		return DCBusAssessment{}, errors.New("assess dc bus: the drive model has no rated current")
	}
	lineV := in.SupplyLineV
	if !(lineV > 0) {
		lineV = in.Ratings.VoltageClassV
	}
	if !(lineV > 0) {
		return DCBusAssessment{}, errors.New("assess dc bus: neither a supply line voltage nor a voltage class is known")
	}
	out := DCBusAssessment{ExpectedLightLoadV: math.Sqrt2 * lineV, MaxBusV: math.NaN()}

	out.Deviation = BusDeviationOf(dcWindow(in.Samples, in.At-p.DeviationWindowS, in.At), lineV, ratedA, p)
	if d := out.Deviation; d.Samples >= p.DeviationMinSamples && math.Abs(d.MedianFraction) > p.DeviationFraction {
		sev := SeverityMinor
		if math.Abs(d.MedianFraction) > 2*p.DeviationFraction {
			sev = SeverityMajor
		}
		why := "a supply voltage above nominal, energy coming back from the load, or a line voltage registered too low"
		dir := "above"
		if d.MedianFraction < 0 {
			dir = "below"
			why = "a low or unbalanced supply, a lost phase, a failing rectifier or pre-charge circuit, or a line voltage registered too high"
		}
		out.Findings = append(out.Findings, drFinding(dcBusRules, "dc_bus.voltage_deviation", sev,
			fmt.Sprintf("The DC bus runs %.0f %% %s the value the %.0f V supply should give (median %.0f V over %d readings); look for %s.",
				100*math.Abs(d.MedianFraction), dir, lineV, d.MedianBusV, d.Samples, why),
			[]Evidence{
				{Name: "median deviation from the expected bus voltage", Value: d.MedianFraction, Unit: "fraction", Limit: p.DeviationFraction, Source: "from memory: 10 % at light load (DESIGN.md section 3), configurable"},
				{Name: "median bus voltage", Value: d.MedianBusV, Unit: "V"},
				{Name: "expected bus voltage at light load (√2 × line)", Value: out.ExpectedLightLoadV, Unit: "V", Source: dutySrcBusVoltage},
				{Name: "expected bus voltage under load (3√2/π × line)", Value: SixPulseMeanFactor * lineV, Unit: "V", Source: dutySrcBusVoltage},
				{Name: "supply line voltage", Value: lineV, Unit: "V"},
				{Name: "bus readings", Value: d.Samples, Limit: p.DeviationMinSamples},
			}, true))
	}

	out.Ripple = RippleTrendOf(in.Samples, ratedA, in.At-p.RippleWindowS, in.At, p)
	if r := out.Ripple; r.Fitted && r.RiseFraction > p.RippleRiseFraction {
		sev := SeverityMinor
		if r.RiseFraction > 2*p.RippleRiseFraction {
			sev = SeverityMajor
		}
		days := float64(r.SpanS) / 86400
		out.Findings = append(out.Findings, drFinding(dcBusRules, "dc_bus.ripple_rising", sev,
			fmt.Sprintf("At the same load the DC-bus ripple rose by %.0f %% over %.0f days (%.2f V per day at %.0f %% load); ageing capacitors or a lost supply phase are the usual causes.",
				100*r.RiseFraction, days, r.PerDayV, 100*r.MeanLoadFraction),
			[]Evidence{
				{Name: "ripple rise at constant load over the window", Value: r.RiseFraction, Unit: "fraction", Limit: p.RippleRiseFraction, Source: "kelvard default, configurable; " + dutySrcBusRipple},
				{Name: "ripple trend at constant load", Value: r.PerDayV, Unit: "V/d"},
				{Name: "ripple per unit of load", Value: r.PerLoadV, Unit: "V"},
				{Name: "fitted ripple at mean load, window start", Value: r.StartV, Unit: "V"},
				{Name: "samples fitted", Value: r.Samples, Limit: p.RippleMinSamples},
				{Name: "span", Value: days, Unit: "d"},
			}, true))
	}

	from := in.At - p.TripWindowS
	nearLimit := p.NearTripFraction * in.Ratings.BusTripV
	for _, s := range dcWindow(in.Samples, from, in.At) {
		if math.IsNaN(s.BusV) {
			continue
		}
		if math.IsNaN(out.MaxBusV) || s.BusV > out.MaxBusV {
			out.MaxBusV = s.BusV
		}
		if in.Ratings.BusTripV > 0 && s.BusV >= nearLimit {
			out.NearTripReadings++
		}
	}
	var how []string
	for _, e := range in.Events {
		if e.Type != EventTrip || e.Cause != TripOverVoltage || e.At <= from || e.At > in.At {
			continue
		}
		out.OverVoltageTrips++
		if dec, h := TripOnDeceleration(e, in.Samples); dec {
			out.DecelerationTrips++
			how = append(how, h)
		}
	}
	near := Evidence{Name: "bus readings near the trip threshold", Value: out.NearTripReadings, Limit: fmt.Sprintf("%.0f V (%.0f %% of %.0f V)", nearLimit, 100*p.NearTripFraction, in.Ratings.BusTripV), Source: dutySrcBusTripDefault}
	maxBus := Evidence{Name: "highest bus reading", Value: out.MaxBusV, Unit: "V", Limit: in.Ratings.BusTripV, Source: "model's over-voltage trip threshold"}
	days := float64(p.TripWindowS) / 86400
	switch {
	case out.DecelerationTrips > 0:
		slices.Sort(how)
		out.Findings = append(out.Findings, drFinding(dcBusRules, "dc_bus.overvoltage_on_deceleration", SeverityMajor,
			fmt.Sprintf("The drive tripped on DC-bus over-voltage %d time(s) while decelerating in the last %.0f days (%d over-voltage trips in all): the load returns more energy than the drive can absorb.",
				out.DecelerationTrips, days, out.OverVoltageTrips),
			[]Evidence{
				{Name: "over-voltage trips while decelerating", Value: out.DecelerationTrips, Limit: 1, Source: dutySrcRegen},
				{Name: "over-voltage trips in the window", Value: out.OverVoltageTrips},
				{Name: "how deceleration was recognised", Value: slices.Compact(how)},
				maxBus, near,
			}, true))
	case out.NearTripReadings > 0:
		out.Findings = append(out.Findings, drFinding(dcBusRules, "dc_bus.near_overvoltage_trip", SeverityMinor,
			fmt.Sprintf("The DC bus reached %.0f V, within %.0f %% of the %.0f V over-voltage trip, in %d reading(s) over the last %.0f days.",
				out.MaxBusV, 100*(1-p.NearTripFraction), in.Ratings.BusTripV, out.NearTripReadings, days),
			[]Evidence{near, maxBus}, true))
	}
	return out, nil
}

// dcWindow returns the samples with fromAt < At <= toAt.
func dcWindow(samples []Sample, fromAt, toAt int64) []Sample {
	var out []Sample
	for _, s := range samples {
		if s.At > fromAt && s.At <= toAt {
			out = append(out, s)
		}
	}
	return out
}

// dcBusRules lists the rules this file raises.
var dcBusRules = []RuleInfo{
	{ID: "dc_bus.voltage_deviation", Kind: KindDCBus, Title: "DC-bus voltage away from what the supply should give",
		Remedy: "Measure the supply line voltages and their balance; check the input fuses, rectifier and pre-charge circuit; correct the registered supply voltage if it is wrong."},
	{ID: "dc_bus.ripple_rising", Kind: KindDCBus, Title: "DC-bus ripple rising at the same load",
		Remedy: "Check all three supply phases and input fuses (a lost phase moves the ripple to twice line frequency and enlarges it); measure the bus capacitors' capacitance and ESR and plan their replacement if they have aged."},
	{ID: "dc_bus.overvoltage_on_deceleration", Kind: KindDCBus, Title: "Over-voltage trips while decelerating",
		Remedy: "Lengthen the deceleration ramp or enable the drive's bus-voltage limiting function; if the process needs the fast stop, fit a braking chopper and resistor, a regenerative or active front end, or share a common DC bus with motoring drives."},
	{ID: "dc_bus.near_overvoltage_trip", Kind: KindDCBus, Title: "DC-bus voltage close to the over-voltage trip",
		Remedy: "Find what lifts the bus (fast deceleration, an overhauling load, a high supply voltage); lengthen ramps or enable bus-voltage limiting before it trips, and consider a braking resistor."},
}
