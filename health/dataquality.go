package health

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat"
)

// This file judges the readings themselves before the models trust them:
// silent positions, stuck sensors, implausible jumps and temperatures that
// look like degrees Fahrenheit logged as Celsius.

// SampleField names one measurement of a Sample, by its API field name.
type SampleField string

// Sample fields.
const (
	FieldInternalAir SampleField = "internal_air_c"
	FieldAmbient     SampleField = "ambient_c"
	FieldHeatsink    SampleField = "heatsink_c"
	FieldCurrent     SampleField = "current_a"
	FieldPeakCurrent SampleField = "peak_current_a"
	FieldFrequency   SampleField = "frequency_hz"
	FieldBus         SampleField = "bus_v"
	FieldBusRipple   SampleField = "bus_ripple_v"
	FieldCapacitance SampleField = "capacitance_uf"
	FieldESR         SampleField = "esr_milliohm"
)

// SampleFields returns every sample field.
func SampleFields() []SampleField {
	return []SampleField{FieldInternalAir, FieldAmbient, FieldHeatsink, FieldCurrent, FieldPeakCurrent,
		FieldFrequency, FieldBus, FieldBusRipple, FieldCapacitance, FieldESR}
}

// Valid reports whether f is known.
func (f SampleField) Valid() bool { return slices.Contains(SampleFields(), f) }

// Of returns the field's value in s, NaN for an unknown field.
func (f SampleField) Of(s Sample) float64 {
	switch f {
	case FieldInternalAir:
		return s.InternalAirC
	case FieldAmbient:
		return s.AmbientC
	case FieldHeatsink:
		return s.HeatsinkC
	case FieldCurrent:
		return s.CurrentA
	case FieldPeakCurrent:
		return s.PeakCurrentA
	case FieldFrequency:
		return s.FrequencyHz
	case FieldBus:
		return s.BusV
	case FieldBusRipple:
		return s.BusRippleV
	case FieldCapacitance:
		return s.CapacitanceUF
	case FieldESR:
		return s.ESRMilliohm
	}
	return math.NaN()
}

// runningOnly reports fields that legitimately sit at zero while the drive
// is stopped, so only running samples are judged for them.
func (f SampleField) runningOnly() bool {
	return f == FieldCurrent || f == FieldPeakCurrent || f == FieldFrequency || f == FieldBusRipple
}

// DataQualityParams are the thresholds of the data-quality rules. Every
// field has a default in DefaultDataQualityParams.
type DataQualityParams struct {
	// SilentAfterS: no reading for longer raises data_quality.silent
	// (minor); SilentMajorAfterS or longer makes it major.
	SilentAfterS      int64 `json:"silent_after_s"`
	SilentMajorAfterS int64 `json:"silent_major_after_s"`
	// StuckFields are judged for stuck values; StuckCount identical
	// consecutive readings spanning at least StuckMinSpanS make a stuck sensor.
	StuckFields   []SampleField `json:"stuck_fields"`
	StuckCount    int           `json:"stuck_count"`
	StuckMinSpanS int64         `json:"stuck_min_span_s"`
	// AirJumpKPerMin and HeatsinkJumpKPerMin: a temperature changing faster
	// between consecutive readings is an implausible jump.
	AirJumpKPerMin      float64 `json:"air_jump_k_per_min"`
	HeatsinkJumpKPerMin float64 `json:"heatsink_jump_k_per_min"`
	// JumpsMin jumps in the samples raise data_quality.implausible_jump.
	JumpsMin int `json:"jumps_min"`
	// FahrenheitMinSamples: fewer ambient readings are not judged.
	FahrenheitMinSamples int `json:"fahrenheit_min_samples"`
	// FahrenheitExcessK: the median ambient must lie this far above the
	// area's design maximum before Fahrenheit is suspected.
	FahrenheitExcessK float64 `json:"fahrenheit_excess_k"`
	// FahrenheitBandK widens the design range for the fit after converting.
	FahrenheitBandK float64 `json:"fahrenheit_band_k"`
	// FahrenheitFitShare of the converted readings must fall in the widened range.
	FahrenheitFitShare float64 `json:"fahrenheit_fit_share"`
	// PlausibleAirMaxC: a median ambient above it is suspected whatever the
	// area's climate.
	PlausibleAirMaxC float64 `json:"plausible_air_max_c"`
}

// DefaultDataQualityParams returns kelvard's defaults (configurable): silent
// after 24 h, major after 7 days; stuck when 24 consecutive identical
// readings span at least 24 h, judged on the temperatures, current, bus
// voltage and ripple (capacitance and ESR are often reported rarely and
// legitimately repeat); jumps faster than 0.5 K/min for air and 3 K/min for
// a heatsink (from memory: room and cabinet air change by a few kelvin an
// hour, a heatsink's thermal time constant is minutes); one jump is enough;
// Fahrenheit judged on at least 24 ambient readings whose median lies 10 K
// above the design maximum and of which 90 % fit the design range ±5 K once
// converted, or whose median exceeds 60 °C (no drive is rated for such air;
// ambient maxima are 50-55 °C, common practice).
func DefaultDataQualityParams() DataQualityParams {
	return DataQualityParams{
		SilentAfterS:         24 * 3600,
		SilentMajorAfterS:    7 * 24 * 3600,
		StuckFields:          []SampleField{FieldInternalAir, FieldAmbient, FieldHeatsink, FieldCurrent, FieldBus, FieldBusRipple},
		StuckCount:           24,
		StuckMinSpanS:        24 * 3600,
		AirJumpKPerMin:       0.5,
		HeatsinkJumpKPerMin:  3,
		JumpsMin:             1,
		FahrenheitMinSamples: 24,
		FahrenheitExcessK:    10,
		FahrenheitBandK:      5,
		FahrenheitFitShare:   0.9,
		PlausibleAirMaxC:     60,
	}
}

// Validate reports a parameter set that cannot work.
func (p DataQualityParams) Validate() error {
	for _, f := range p.StuckFields {
		if !f.Valid() {
			return fmt.Errorf("data quality parameters: stuck field %q is not one of %v", f, SampleFields())
		}
	}
	switch {
	case p.SilentAfterS <= 0 || p.SilentMajorAfterS < p.SilentAfterS:
		return fmt.Errorf("data quality parameters: need 0 < silent_after_s (%d) <= silent_major_after_s (%d)", p.SilentAfterS, p.SilentMajorAfterS)
	case p.StuckCount < 2 || p.StuckMinSpanS < 0:
		return fmt.Errorf("data quality parameters: stuck_count must be at least 2 and stuck_min_span_s not negative")
	case !(p.AirJumpKPerMin > 0) || !(p.HeatsinkJumpKPerMin > 0) || p.JumpsMin < 1:
		return fmt.Errorf("data quality parameters: jump limits must be above 0 and jumps_min at least 1")
	case p.FahrenheitMinSamples < 1 || !(p.FahrenheitFitShare > 0 && p.FahrenheitFitShare <= 1) || p.FahrenheitBandK < 0 || p.FahrenheitExcessK < 0:
		return fmt.Errorf("data quality parameters: Fahrenheit thresholds out of range")
	}
	return nil
}

// CheckSilent raises data_quality.silent when the latest reading is older
// than SilentAfterS at the assessment time at (minor; major from
// SilentMajorAfterS). lastAt is the latest reading's time, Unix seconds;
// seen is false when the position has never sent a reading (then the
// finding says so). The assessment time is an argument: the package never
// reads the clock. Thresholds are kelvard defaults, configurable.
func CheckSilent(lastAt int64, seen bool, at int64, p DataQualityParams) []Finding {
	if seen && at-lastAt <= p.SilentAfterS {
		return nil
	}
	if !seen {
		return []Finding{drFinding(dataQualityRules, "data_quality.silent", SeverityMinor,
			"The position has never sent a reading.",
			[]Evidence{{Name: "readings received", Value: 0, Limit: 1, Source: "kelvard: a registered position is expected to report"}}, false)}
	}
	age := at - lastAt
	sev := SeverityMinor
	if age >= p.SilentMajorAfterS {
		sev = SeverityMajor
	}
	return []Finding{drFinding(dataQualityRules, "data_quality.silent", sev,
		fmt.Sprintf("No reading has arrived for %.1f hours (the last at Unix time %d).", float64(age)/3600, lastAt),
		[]Evidence{
			{Name: "hours since the last reading", Value: float64(age) / 3600, Unit: "h", Limit: float64(p.SilentAfterS) / 3600, Source: "kelvard default, configurable"},
			{Name: "hours from which severity is major", Value: float64(age) / 3600, Unit: "h", Limit: float64(p.SilentMajorAfterS) / 3600},
			{Name: "last reading at (Unix s)", Value: lastAt},
		}, false)}
}

// StuckRun is a run of identical consecutive readings of one field.
type StuckRun struct {
	Field  SampleField `json:"field"`
	Value  float64     `json:"value"`
	Count  int         `json:"count"`
	FromAt int64       `json:"from_at"`
	ToAt   int64       `json:"to_at"`
}

// StuckRuns returns, per field, the longest run of exactly equal
// consecutive readings that has at least StuckCount readings spanning at
// least StuckMinSpanS (samples sorted by At). Readings not logged (NaN) are
// skipped without breaking a run; current, peak current, frequency and
// ripple are judged only while the drive runs, since a stopped drive logs
// zeros honestly. A live analogue sensor never repeats its value to the last
// bit for a day (common practice); a frozen gateway or a failed sensor does.
func StuckRuns(samples []Sample, p DataQualityParams) []StuckRun {
	var out []StuckRun
	for _, f := range p.StuckFields {
		var best, cur StuckRun
		for _, s := range samples {
			if f.runningOnly() && !s.Running() {
				continue
			}
			v := f.Of(s)
			if math.IsNaN(v) {
				continue
			}
			if cur.Count > 0 && v == cur.Value {
				cur.Count++
				cur.ToAt = s.At
			} else {
				cur = StuckRun{Field: f, Value: v, Count: 1, FromAt: s.At, ToAt: s.At}
			}
			if cur.Count >= p.StuckCount && cur.ToAt-cur.FromAt >= p.StuckMinSpanS && cur.Count > best.Count {
				best = cur
			}
		}
		if best.Count > 0 {
			out = append(out, best)
		}
	}
	return out
}

// JumpSummary counts implausibly fast changes of one temperature field.
type JumpSummary struct {
	Field        SampleField `json:"field"`
	Count        int         `json:"count"`
	LimitKPerMin float64     `json:"limit_k_per_min"`
	WorstKPerMin float64     `json:"worst_k_per_min"`
	WorstAt      int64       `json:"worst_at"`
}

// TemperatureJumps returns, for the air and heatsink temperatures, the
// changes between consecutive logged readings faster than the limit:
//
//	|T_i - T_(i-1)| / ((t_i - t_(i-1)) / 60 s) > limit   (K/min)
//
// with limits AirJumpKPerMin (internal and ambient air) and
// HeatsinkJumpKPerMin (from memory; see DefaultDataQualityParams). A single
// spike counts twice (up and back). Readings with the same or an earlier
// time than the one before are skipped. Only fields with jumps are
// returned.
func TemperatureJumps(samples []Sample, p DataQualityParams) []JumpSummary {
	var out []JumpSummary
	for _, f := range []SampleField{FieldInternalAir, FieldAmbient, FieldHeatsink} {
		limit := p.AirJumpKPerMin
		if f == FieldHeatsink {
			limit = p.HeatsinkJumpKPerMin
		}
		j := JumpSummary{Field: f, LimitKPerMin: limit}
		var prevV float64
		var prevAt int64
		have := false
		for _, s := range samples {
			v := f.Of(s)
			if math.IsNaN(v) {
				continue
			}
			if have && s.At > prevAt {
				rate := math.Abs(v-prevV) / (float64(s.At-prevAt) / 60)
				if rate > limit {
					j.Count++
					if rate > j.WorstKPerMin {
						j.WorstKPerMin, j.WorstAt = rate, s.At
					}
				}
			}
			if !have || s.At > prevAt {
				prevV, prevAt, have = v, s.At, true
			}
		}
		if j.Count > 0 {
			out = append(out, j)
		}
	}
	return out
}

// FahrenheitCheck is the evidence for or against ambient readings being
// degrees Fahrenheit logged as Celsius.
type FahrenheitCheck struct {
	Samples int `json:"samples"`
	// MedianC is the median logged ambient.
	MedianC float64 `json:"median_c"`
	// FitRaw and FitConverted are the shares of readings inside the design
	// range widened by FahrenheitBandK, as logged and after (T - 32) / 1.8.
	FitRaw       float64 `json:"fit_raw_fraction"`
	FitConverted float64 `json:"fit_converted_fraction"`
	Suspected    bool    `json:"suspected"`
	Reason       string  `json:"reason,omitempty"`
}

// FahrenheitSuspected judges whether the ambient readings look like °F
// logged as °C, using the conversion T_C = (T_F - 32) / 1.8 (definition of
// the Fahrenheit scale). Suspected when there are at least
// FahrenheitMinSamples readings and either
//
//   - the median lies above PlausibleAirMaxC (air no drive is rated for), or
//   - the area's design range is known, the median lies more than
//     FahrenheitExcessK above its maximum, at least FahrenheitFitShare of
//     the converted readings fall inside the range widened by
//     FahrenheitBandK, and more of them than of the readings as logged.
//
// Pass NaN for an unknown design range. Valid for the air around a drive in
// mild and warm weather: there a °F reading is always much the larger
// number (F - C = 0.8 C + 32, 48 K at 20 °C). In frost the two scales close
// in (-40 reads the same on both), so a window of winter readings at a cold
// site may miss it. A real ambient far above the design maximum also trips
// the second test; the remedy then is to correct the area's design range or
// the sensor's place.
func FahrenheitSuspected(samples []Sample, designMinC, designMaxC float64, p DataQualityParams) FahrenheitCheck {
	var v []float64
	for _, s := range samples {
		if !math.IsNaN(s.AmbientC) && !math.IsInf(s.AmbientC, 0) {
			v = append(v, s.AmbientC)
		}
	}
	out := FahrenheitCheck{Samples: len(v), MedianC: math.NaN(), FitRaw: math.NaN(), FitConverted: math.NaN()}
	if len(v) < p.FahrenheitMinSamples || len(v) == 0 {
		return out
	}
	slices.Sort(v)
	out.MedianC = stat.Quantile(0.5, stat.LinInterp, v, nil)
	if !math.IsNaN(designMinC) && !math.IsNaN(designMaxC) {
		lo, hi := designMinC-p.FahrenheitBandK, designMaxC+p.FahrenheitBandK
		raw, conv := 0, 0
		for _, t := range v {
			if t >= lo && t <= hi {
				raw++
			}
			if c := (t - 32) / 1.8; c >= lo && c <= hi {
				conv++
			}
		}
		out.FitRaw, out.FitConverted = float64(raw)/float64(len(v)), float64(conv)/float64(len(v))
		if out.MedianC > designMaxC+p.FahrenheitExcessK && out.FitConverted >= p.FahrenheitFitShare && out.FitConverted > out.FitRaw {
			out.Suspected = true
			out.Reason = fmt.Sprintf("the median ambient of %.1f °C lies %.1f K above the area's design maximum of %.1f °C, and %.0f %% of the readings fall within the design range once read as °F",
				out.MedianC, out.MedianC-designMaxC, designMaxC, 100*out.FitConverted)
			return out
		}
	}
	if out.MedianC > p.PlausibleAirMaxC {
		out.Suspected = true
		out.Reason = fmt.Sprintf("the median ambient of %.1f °C is above %.0f °C, air no drive is rated for; read as °F it would be %.1f °C",
			out.MedianC, p.PlausibleAirMaxC, (out.MedianC-32)/1.8)
	}
	return out
}

// DataQualityInput is everything AssessDataQuality judges.
type DataQualityInput struct {
	// Samples of the window to judge, sorted by At.
	Samples []Sample
	// LastReadingAt is the latest reading the position ever sent (it may
	// lie before the window); 0 when unknown, then the latest sample is
	// used. No reading at all (0 and no samples) counts as never seen.
	LastReadingAt int64
	// At is the assessment time, Unix seconds.
	At int64
	// DesignAmbientMinC and DesignAmbientMaxC are the area's design range;
	// NaN when unknown.
	DesignAmbientMinC float64
	DesignAmbientMaxC float64
}

// AssessDataQuality raises data_quality.silent (CheckSilent),
// data_quality.stuck_sensor (minor, one per stuck field; StuckRuns),
// data_quality.implausible_jump (minor, one per field with at least
// JumpsMin jumps; TemperatureJumps) and data_quality.fahrenheit_suspected
// (major, as it corrupts every temperature model; FahrenheitSuspected).
// Sources and validity as the functions named.
func AssessDataQuality(in DataQualityInput, p DataQualityParams) ([]Finding, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	last := in.LastReadingAt
	for _, s := range in.Samples {
		last = max(last, s.At)
	}
	out := CheckSilent(last, last != 0, in.At, p)

	for _, r := range StuckRuns(in.Samples, p) {
		hours := float64(r.ToAt-r.FromAt) / 3600
		out = append(out, drFinding(dataQualityRules, "data_quality.stuck_sensor", SeverityMinor,
			fmt.Sprintf("%s repeated the value %g in %d consecutive readings over %.1f hours: the sensor or its link looks frozen.", r.Field, r.Value, r.Count, hours),
			[]Evidence{
				{Name: "field", Value: string(r.Field)},
				{Name: "identical consecutive readings", Value: r.Count, Limit: p.StuckCount, Source: "kelvard default, configurable"},
				{Name: "hours the value stayed identical", Value: hours, Unit: "h", Limit: float64(p.StuckMinSpanS) / 3600},
				{Name: "repeated value", Value: r.Value},
				{Name: "from (Unix s)", Value: r.FromAt},
			}, true))
	}

	for _, j := range TemperatureJumps(in.Samples, p) {
		if j.Count < p.JumpsMin {
			continue
		}
		out = append(out, drFinding(dataQualityRules, "data_quality.implausible_jump", SeverityMinor,
			fmt.Sprintf("%s changed faster than %.1f K per minute %d time(s), at worst %.1f K per minute: more like a faulty sensor or wiring than real air or metal.",
				j.Field, j.LimitKPerMin, j.Count, j.WorstKPerMin),
			[]Evidence{
				{Name: "field", Value: string(j.Field)},
				{Name: "fastest change", Value: j.WorstKPerMin, Unit: "K/min", Limit: j.LimitKPerMin, Source: "from memory: air changes by a few kelvin an hour, a heatsink over minutes; configurable"},
				{Name: "jumps", Value: j.Count, Limit: p.JumpsMin},
				{Name: "worst at (Unix s)", Value: j.WorstAt},
			}, true))
	}

	if fc := FahrenheitSuspected(in.Samples, in.DesignAmbientMinC, in.DesignAmbientMaxC, p); fc.Suspected {
		out = append(out, drFinding(dataQualityRules, "data_quality.fahrenheit_suspected", SeverityMajor,
			"The ambient readings look like degrees Fahrenheit logged as Celsius: "+fc.Reason+".",
			[]Evidence{
				{Name: "median ambient as logged", Value: fc.MedianC, Unit: "°C", Limit: in.DesignAmbientMaxC + p.FahrenheitExcessK, Source: "area design maximum + kelvard default margin, configurable"},
				{Name: "area design range", Value: fmt.Sprintf("%.1f to %.1f", in.DesignAmbientMinC, in.DesignAmbientMaxC), Unit: "°C"},
				{Name: "share in the design range as logged", Value: fc.FitRaw, Unit: "fraction"},
				{Name: "share in the design range read as °F, (T - 32) / 1.8", Value: fc.FitConverted, Unit: "fraction", Limit: p.FahrenheitFitShare, Source: "definition of the Fahrenheit scale"},
				{Name: "plausible air maximum", Value: fc.MedianC, Unit: "°C", Limit: p.PlausibleAirMaxC, Source: "common practice: drives are rated to 50-55 °C ambient"},
				{Name: "readings", Value: fc.Samples, Limit: p.FahrenheitMinSamples},
			}, false))
	}
	return out, nil
}

// dataQualityRules lists the rules this file raises.
var dataQualityRules = []RuleInfo{
	{ID: "data_quality.silent", Kind: KindDataQuality, Title: "No readings from the position",
		Remedy: "Check the gateway or historian export for this position, the network link and the drive's communication card; until readings resume, life and duty are not being tracked."},
	{ID: "data_quality.stuck_sensor", Kind: KindDataQuality, Title: "Sensor value stuck",
		Remedy: "Check the sensor, its wiring and the mapping in the gateway; a gateway that repeats its last value when the link drops is a common cause."},
	{ID: "data_quality.implausible_jump", Kind: KindDataQuality, Title: "Implausible temperature jumps",
		Remedy: "Check the sensor, its connector and shielding, and the gateway's scaling; exclude the bad readings from life calculations if they recur."},
	{ID: "data_quality.fahrenheit_suspected", Kind: KindDataQuality, Title: "Temperatures look like °F logged as °C",
		Remedy: "Check the unit setting of the drive, gateway or export and convert with (T - 32) / 1.8; if the readings are truly °C, correct the area's design range or the sensor's placement. Life calculations from these readings are unreliable until then."},
}
