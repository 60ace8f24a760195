package health

import (
	"fmt"
	"math"
	"time"

	"gonum.org/v1/gonum/stat"
)

// This file holds the DC-bus aluminium electrolytic capacitors: the rating,
// the core temperature, the life at a constant core temperature, the end of
// life by measured capacitance or ESR, and the capacitor findings. Life
// accumulated over a varying history (Miner's rule) is in miner.go.

// BoltzmannEV is the Boltzmann constant in electronvolts per kelvin (CODATA
// 2018, exact by the 2019 SI definition).
const BoltzmannEV = 8.617333262e-5

// lifeKelvinOffset converts degrees Celsius to kelvin.
const lifeKelvinOffset = 273.15

// CapacitorSpec is the rating of a drive's DC-bus capacitor bank, as the
// capacitor maker states it in the datasheet life formula.
type CapacitorSpec struct {
	// RatedLifeH is the rated (load) life L0 in hours, for example 5000.
	RatedLifeH float64 `json:"rated_life_h"`
	// RatedTempC is the rated (category) temperature T0, for example 105.
	RatedTempC float64 `json:"rated_temp_c"`
	// RatingIncludesRipple is true when the rated life is stated with rated
	// ripple current applied (the usual case); the reference core
	// temperature is then T0 + RippleRiseC.
	RatingIncludesRipple bool `json:"rating_includes_ripple"`
	// RippleRiseC is the core self-heating at rated ripple current, dT_rated
	// (about 5 °C for ordinary 105 °C parts). Zero leaves out the ripple term.
	RippleRiseC float64 `json:"ripple_rise_c"`
	// RippleRefCurrentA is the drive output current at which the bank
	// carries its rated ripple current, usually the drive's rated output
	// current: output current is the usual proxy for ripple current
	// (common practice). Needed when RippleRiseC is above zero.
	RippleRefCurrentA float64 `json:"ripple_ref_current_a"`
	// ActivationEnergyEV selects the Arrhenius law with this activation
	// energy in eV (typically 0.6 to 0.9). Zero selects the 10-degree rule.
	ActivationEnergyEV float64 `json:"activation_energy_ev"`
	// MaxLifeH caps the life at any temperature, in hours; zero means no
	// cap. Capacitor makers commonly stop extrapolating somewhere around
	// 15 years (about 130 000 h) because the electrolyte dries out whatever
	// the temperature (from memory); set it per drive model.
	MaxLifeH float64 `json:"max_life_h"`
}

// DefaultCapacitorSpec returns an ordinary 105 °C, 5000 h capacitor rated
// with ripple, with 5 °C core rise at rated ripple (values typical of makers'
// published life formulas) and the 10-degree rule. RippleRefCurrentA is left
// at zero: the caller sets it to the drive's rated output current.
func DefaultCapacitorSpec() CapacitorSpec {
	return CapacitorSpec{
		RatedLifeH:           5000,
		RatedTempC:           105,
		RatingIncludesRipple: true,
		RippleRiseC:          5,
	}
}

// Validate reports the first field that makes the spec unusable.
func (s CapacitorSpec) Validate() error {
	switch {
	case !(s.RatedLifeH > 0) || math.IsInf(s.RatedLifeH, 0):
		return fmt.Errorf("capacitor spec: rated life %v h must be a positive number", s.RatedLifeH)
	case !(s.RatedTempC > 0 && s.RatedTempC <= 200):
		return fmt.Errorf("capacitor spec: rated temperature %v °C must lie in (0, 200]", s.RatedTempC)
	case !(s.RippleRiseC >= 0 && s.RippleRiseC <= 40):
		return fmt.Errorf("capacitor spec: ripple rise %v °C must lie in [0, 40]", s.RippleRiseC)
	case s.RippleRiseC > 0 && !(s.RippleRefCurrentA > 0):
		return fmt.Errorf("capacitor spec: ripple reference current %v A must be positive when the ripple rise is set", s.RippleRefCurrentA)
	case !(s.ActivationEnergyEV == 0 || (s.ActivationEnergyEV > 0 && s.ActivationEnergyEV <= 3)):
		return fmt.Errorf("capacitor spec: activation energy %v eV must be 0 (10-degree rule) or lie in (0, 3]", s.ActivationEnergyEV)
	case !(s.MaxLifeH == 0 || s.MaxLifeH >= s.RatedLifeH):
		return fmt.Errorf("capacitor spec: life cap %v h must be 0 or at least the rated life", s.MaxLifeH)
	}
	return nil
}

// RefTempC returns the reference core temperature Tref: T0 + dT_rated when
// the rating includes rated ripple, else T0 (DESIGN.md section 3, after the
// makers' life formulas).
func (s CapacitorSpec) RefTempC() float64 {
	if s.RatingIncludesRipple {
		return s.RatedTempC + s.RippleRiseC
	}
	return s.RatedTempC
}

// Law names the life law the spec selects: "10-degree rule" or "Arrhenius".
func (s CapacitorSpec) Law() string {
	if s.ActivationEnergyEV > 0 {
		return "Arrhenius"
	}
	return "10-degree rule"
}

// CoreTempC returns the capacitor core (hot-spot) temperature
//
//	core = air + dT_rated * (I / I_rated)^2
//
// with air the air temperature at the drive, I the output current as the
// proxy for ripple current and I_rated = RippleRefCurrentA (ripple
// self-heating grows with the square of the ripple current: makers' life
// formulas; the output-current proxy is common practice). With no ripple term
// (RippleRiseC zero) the core is the air. A NaN current gives NaN when the
// ripple term is set. Valid for currents up to about 1.5 times rated, where
// the square law of resistive self-heating still holds.
func (s CapacitorSpec) CoreTempC(airC, currentA float64) float64 {
	if s.RippleRiseC == 0 {
		return airC
	}
	r := currentA / s.RippleRefCurrentA
	return airC + s.RippleRiseC*r*r
}

// LifeH returns the life in hours at a constant core temperature.
//
// 10-degree rule (ActivationEnergyEV zero):
//
//	L = L0 * 2^((Tref - T)/10)
//
// Arrhenius (ActivationEnergyEV = Ea):
//
//	L = L0 * exp((Ea/k) * (1/T - 1/Tref)),  T and Tref in kelvin, k = BoltzmannEV
//
// Source: capacitor makers' application notes (10-degree rule) and the
// Arrhenius law of reaction rates. Tref is RefTempC, so at the rated
// temperature with rated ripple current the result is exactly L0. The result
// is capped at MaxLifeH when that is set. Valid from about 40 °C up to the
// rated temperature; makers do not warrant extrapolation beyond it, and
// below about 40 °C the estimate is optimistic (from memory). The 10-degree
// form is computed so that 10 °C hotter gives exactly half the life.
func (s CapacitorSpec) LifeH(coreC float64) float64 {
	var l float64
	if s.ActivationEnergyEV > 0 {
		l = s.RatedLifeH * math.Exp(s.ActivationEnergyEV/BoltzmannEV*(1/(coreC+lifeKelvinOffset)-1/(s.RefTempC()+lifeKelvinOffset)))
	} else {
		l = halvingLife(s.RatedLifeH, s.RefTempC()-coreC, 10)
	}
	if s.MaxLifeH > 0 && l > s.MaxLifeH {
		l = s.MaxLifeH
	}
	return l
}

// halvingLife returns l0 * 2^(d/h), computed as l0 * 2^(m/h) * 2^n with
// d = n*h + m, 0 <= m < h, so that adding h to d doubles the result exactly
// whenever d and d+h are exact (the exponent is split with an exact
// floating-point remainder and the power of two is applied by Ldexp).
func halvingLife(l0, d, h float64) float64 {
	if math.IsNaN(d) || math.IsInf(d, 0) {
		return l0 * math.Exp2(d/h)
	}
	m := math.Mod(d, h)
	if m < 0 {
		m += h
	}
	n := math.Round((d - m) / h)
	if math.Abs(n) > 2000 {
		return l0 * math.Exp2(d/h)
	}
	return math.Ldexp(l0*math.Exp2(m/h), int(n))
}

// ActivationEnergyFromLives returns the activation energy in eV of the
// Arrhenius law that passes through two (temperature, life) points:
//
//	Ea = k * ln(L1/L2) / (1/T1 - 1/T2),  T in kelvin, k = BoltzmannEV
//
// Source: the Arrhenius law solved for Ea. Applied to two lives of the
// 10-degree rule it gives the activation energy that rule implies in that
// temperature window: Ea = k * ln2 * T1 * T2 / 10 for T2 = T1 + 10, about
// 0.79 eV between 85 and 95 °C and about 0.60 eV between 40 and 50 °C. The
// temperatures must differ; any positive lives are accepted.
func ActivationEnergyFromLives(t1C, life1H, t2C, life2H float64) float64 {
	return BoltzmannEV * math.Log(life1H/life2H) / (1/(t1C+lifeKelvinOffset) - 1/(t2C+lifeKelvinOffset))
}

// capLaw holds the constants of a capacitor life law for the accumulation
// loop: damage per second at a core temperature.
type capLaw struct {
	arrhenius bool
	tref      float64 // reference core temperature, °C
	invL0s    float64 // 1 / (L0 in seconds)
	eaK       float64 // Ea / k, K
	invTrefK  float64 // 1 / Tref in kelvin
	minRateS  float64 // damage per second at the life cap, or 0
	rise      float64 // dT_rated
	invIref   float64 // 1 / I_rated, 0 without a ripple term
	tab       exp2Table
}

func newCapLaw(s CapacitorSpec) capLaw {
	l := capLaw{
		arrhenius: s.ActivationEnergyEV > 0,
		tref:      s.RefTempC(),
		invL0s:    1 / (s.RatedLifeH * 3600),
		eaK:       s.ActivationEnergyEV / BoltzmannEV,
		invTrefK:  1 / (s.RefTempC() + lifeKelvinOffset),
		rise:      s.RippleRiseC,
		tab:       newExp2Table(),
	}
	if s.MaxLifeH > 0 {
		l.minRateS = 1 / (s.MaxLifeH * 3600)
	}
	if s.RippleRiseC > 0 {
		l.invIref = 1 / s.RippleRefCurrentA
	}
	return l
}

// rateS returns damage per second at a core temperature: 1 / L(T) with L in
// seconds. It is the hot path of accumulation, so the 10-degree rule uses
// the table-driven exp2 of miner.go; the result agrees with
// CapacitorSpec.LifeH to a few units in the last place.
func (l *capLaw) rateS(coreC float64) float64 {
	var r float64
	if l.arrhenius {
		r = l.invL0s * math.Exp(l.eaK*(l.invTrefK-1/(coreC+lifeKelvinOffset)))
	} else {
		r = l.invL0s * l.tab.exp2((coreC-l.tref)*0.1)
	}
	if r < l.minRateS {
		r = l.minRateS
	}
	return r
}

// CapacitorParams are the thresholds and assumptions of the capacitor model.
// Every field has a default in DefaultCapacitorParams; a drive model, area or
// site may override any of them.
type CapacitorParams struct {
	Interval   LifeIntervalParams   `json:"interval"`
	Projection LifeProjectionParams `json:"projection"`
	// FillCurrentRatio is the ripple ratio I/I_rated assumed over gaps,
	// default 1 (full rated ripple: nothing shows the drive was idle, so
	// the estimate errs toward an earlier end of life).
	FillCurrentRatio float64 `json:"fill_current_ratio"`
	// MissingCurrentRatio is the ripple ratio assumed where the current was
	// not logged and the drive is not known to be stopped, default 1 for
	// the same reason.
	MissingCurrentRatio float64 `json:"missing_current_ratio"`
	// HorizonDays: a projected end of life within this many days of the
	// assessment raises capacitor.end_of_life_near, default 365.
	HorizonDays float64 `json:"horizon_days"`
	// MajorWithinDays: within this many days the finding is major, beyond
	// it minor, default 90 (a quarter: time to order parts and book an
	// outage, common practice).
	MajorWithinDays float64 `json:"major_within_days"`
	// CapacitanceEndFraction: end of life when capacitance falls to this
	// fraction of its initial value, default 0.8; ESREndFactor: when ESR
	// rises to this multiple of its initial value, default 2 (capacitor
	// datasheet endurance limits).
	CapacitanceEndFraction float64 `json:"capacitance_end_fraction"`
	ESREndFactor           float64 `json:"esr_end_factor"`
	// WarnProgressFraction and MajorProgressFraction: a measured value this
	// far along the way from its initial value to its limit raises
	// capacitor.measured_degradation as minor (default 0.5) or major
	// (default 0.8); common practice.
	WarnProgressFraction  float64 `json:"warn_progress_fraction"`
	MajorProgressFraction float64 `json:"major_progress_fraction"`
	// MinTrendPoints is the least number of measured values for a trend
	// projection, default 3.
	MinTrendPoints int `json:"min_trend_points"`
}

// DefaultCapacitorParams returns the defaults documented on each field.
func DefaultCapacitorParams() CapacitorParams {
	return CapacitorParams{
		Interval:               DefaultLifeIntervalParams(),
		Projection:             DefaultLifeProjectionParams(),
		FillCurrentRatio:       1,
		MissingCurrentRatio:    1,
		HorizonDays:            365,
		MajorWithinDays:        90,
		CapacitanceEndFraction: 0.8,
		ESREndFactor:           2,
		WarnProgressFraction:   0.5,
		MajorProgressFraction:  0.8,
		MinTrendPoints:         3,
	}
}

// Validate reports the first unusable field.
func (p CapacitorParams) Validate() error {
	if err := p.Interval.Validate(); err != nil {
		return fmt.Errorf("capacitor params: %w", err)
	}
	if err := p.Projection.Validate(); err != nil {
		return fmt.Errorf("capacitor params: %w", err)
	}
	switch {
	case !(p.FillCurrentRatio >= 0 && p.FillCurrentRatio <= 3):
		return fmt.Errorf("capacitor params: fill current ratio %v must lie in [0, 3]", p.FillCurrentRatio)
	case !(p.MissingCurrentRatio >= 0 && p.MissingCurrentRatio <= 3):
		return fmt.Errorf("capacitor params: missing current ratio %v must lie in [0, 3]", p.MissingCurrentRatio)
	case !(p.HorizonDays >= 0):
		return fmt.Errorf("capacitor params: horizon %v days must not be negative", p.HorizonDays)
	case !(p.MajorWithinDays >= 0 && p.MajorWithinDays <= p.HorizonDays):
		return fmt.Errorf("capacitor params: major-within %v days must lie in [0, horizon]", p.MajorWithinDays)
	case !(p.CapacitanceEndFraction > 0 && p.CapacitanceEndFraction < 1):
		return fmt.Errorf("capacitor params: capacitance end fraction %v must lie in (0, 1)", p.CapacitanceEndFraction)
	case !(p.ESREndFactor > 1):
		return fmt.Errorf("capacitor params: ESR end factor %v must exceed 1", p.ESREndFactor)
	case !(p.WarnProgressFraction > 0 && p.WarnProgressFraction <= p.MajorProgressFraction && p.MajorProgressFraction <= 1):
		return fmt.Errorf("capacitor params: warning %v and major %v progress fractions must satisfy 0 < warn <= major <= 1", p.WarnProgressFraction, p.MajorProgressFraction)
	case p.MinTrendPoints < 2:
		return fmt.Errorf("capacitor params: minimum trend points %d must be at least 2", p.MinTrendPoints)
	}
	return nil
}

// CapacitorLifeReport is the thermal life position of a capacitor bank.
type CapacitorLifeReport struct {
	LifeReport
	// Law is "10-degree rule" or "Arrhenius"; RefTempC the reference core
	// temperature; RatedLifeH the rated life L0.
	Law        string  `json:"law"`
	RefTempC   float64 `json:"ref_temp_c"`
	RatedLifeH float64 `json:"rated_life_h"`
	// EquivalentCoreC is the constant core temperature that would give the
	// trailing-window damage rate (NaN without a rate). It is hotter than
	// the mean core temperature because life falls exponentially.
	EquivalentCoreC float64 `json:"equivalent_core_c"`
}

// CapacitorLife reports the life position of a capacitor bank from its
// state at the assessment time at (Unix seconds; the caller supplies it):
// life used D, remaining hours (1 - D)/r at the trailing-12-month rate r (or
// all history when shorter) and at the 30-day rate, the projected end of
// life with a band from the mildest and harshest month of the trailing year,
// and the mean and equivalent core temperatures (Palmgren–Miner rule;
// remaining-life convention of DESIGN.md section 3). The time between the
// last reading and at is assumed to age the part at the trailing rate.
// Valid while the future resembles the trailing window.
func CapacitorLife(spec CapacitorSpec, p CapacitorParams, st CapacitorState, at int64) (CapacitorLifeReport, error) {
	if err := spec.Validate(); err != nil {
		return CapacitorLifeReport{}, fmt.Errorf("capacitor life: %w", err)
	}
	if err := p.Validate(); err != nil {
		return CapacitorLifeReport{}, fmt.Errorf("capacitor life: %w", err)
	}
	r := CapacitorLifeReport{
		LifeReport:      st.project(p.Projection, at),
		Law:             spec.Law(),
		RefTempC:        spec.RefTempC(),
		RatedLifeH:      spec.RatedLifeH,
		EquivalentCoreC: math.NaN(),
	}
	if rate := r.DamageRatePerH; rate > 0 {
		x := rate * spec.RatedLifeH
		if spec.ActivationEnergyEV > 0 {
			r.EquivalentCoreC = 1/(1/(spec.RefTempC()+lifeKelvinOffset)-BoltzmannEV/spec.ActivationEnergyEV*math.Log(x)) - lifeKelvinOffset
		} else {
			r.EquivalentCoreC = spec.RefTempC() + 10*math.Log2(x)
		}
	}
	return r, nil
}

// CapacitorMeasurement is one capacitance or ESR value a drive reported.
// A quantity not reported is NaN.
type CapacitorMeasurement struct {
	At            int64   `json:"at"`
	CapacitanceUF float64 `json:"capacitance_uf"`
	ESRMilliohm   float64 `json:"esr_milliohm"`
}

// CapacitorMeasurements picks the readings that carry a capacitance or an
// ESR value (finite and positive), in the order given.
func CapacitorMeasurements(samples []Sample) []CapacitorMeasurement {
	var out []CapacitorMeasurement
	for _, s := range samples {
		c, e := lifePositive(s.CapacitanceUF), lifePositive(s.ESRMilliohm)
		if math.IsNaN(c) && math.IsNaN(e) {
			continue
		}
		out = append(out, CapacitorMeasurement{At: s.At, CapacitanceUF: c, ESRMilliohm: e})
	}
	return out
}

// lifePositive returns x when it is finite and above zero, else NaN.
func lifePositive(x float64) float64 {
	if lifeFinite(x) && x > 0 {
		return x
	}
	return math.NaN()
}

// CapacitorInitial holds the initial capacitance and ESR of a bank, from the
// nameplate or a measurement at commissioning. Zero means "take the first
// reported value".
type CapacitorInitial struct {
	CapacitanceUF float64 `json:"capacitance_uf"`
	ESRMilliohm   float64 `json:"esr_milliohm"`
}

// Measured quantities.
const (
	QuantityCapacitance = "capacitance"
	QuantityESR         = "esr"
)

// CapacitorTrend is the state of one measured quantity against its
// end-of-life limit.
type CapacitorTrend struct {
	Quantity string  `json:"quantity"`
	Unit     string  `json:"unit"`
	Points   int     `json:"points"`
	Initial  float64 `json:"initial"`
	Latest   float64 `json:"latest"`
	LatestAt int64   `json:"latest_at"`
	Limit    float64 `json:"limit"`
	// Progress is 0 at the initial value and 1 at the limit.
	Progress float64 `json:"progress_fraction"`
	// Crossed tells whether the latest value is at or past the limit;
	// CrossedAt is the first reading of the trailing run past it.
	Crossed   bool  `json:"crossed"`
	CrossedAt int64 `json:"crossed_at,omitempty"`
	// SlopePerDay is the least-squares slope of the values over time.
	SlopePerDay float64 `json:"slope_per_day"`
	// Projected tells whether the trend reaches the limit; ProjectedAt is
	// when (never before the latest reading).
	Projected   bool  `json:"projected"`
	ProjectedAt int64 `json:"projected_at,omitempty"`
}

// CapacitorMeasuredReport is the end of life of a bank by measurement: capacitance at
// or below CapacitanceEndFraction of initial or ESR at or above ESREndFactor
// times initial, whichever first (capacitor datasheet endurance limits).
type CapacitorMeasuredReport struct {
	HasCapacitance bool           `json:"has_capacitance"`
	HasESR         bool           `json:"has_esr"`
	Capacitance    CapacitorTrend `json:"capacitance"`
	ESR            CapacitorTrend `json:"esr"`
	// Crossed: a limit is crossed; DecidedBy names the quantity that
	// crossed first (or, if none has, reaches its limit first by trend).
	Crossed     bool   `json:"crossed"`
	CrossedAt   int64  `json:"crossed_at,omitempty"`
	Projected   bool   `json:"projected"`
	ProjectedAt int64  `json:"projected_at,omitempty"`
	DecidedBy   string `json:"decided_by,omitempty"`
}

// CapacitorMeasured judges reported capacitance and ESR against the
// endurance limits of capacitor datasheets: end of life at
//
//	C <= CapacitanceEndFraction * C0   (default 0.8)
//	ESR >= ESREndFactor * ESR0         (default 2)
//
// whichever comes first, C0 and ESR0 the initial values (supplied, else the
// first reported). The latest value decides whether a limit is crossed. A
// least-squares straight line of value against time (gonum stat.
// LinearRegression), fitted when there are MinTrendPoints values, projects
// when the limit will be reached. The measurements must be sorted by At.
// Valid for the gradual wear-out drift the limits describe; a linear fit
// understates the late acceleration of capacitance loss, so the projected
// date is a latest plausible date.
func CapacitorMeasured(ms []CapacitorMeasurement, initial CapacitorInitial, p CapacitorParams) (CapacitorMeasuredReport, error) {
	if err := p.Validate(); err != nil {
		return CapacitorMeasuredReport{}, fmt.Errorf("capacitor measurements: %w", err)
	}
	var r CapacitorMeasuredReport
	r.Capacitance, r.HasCapacitance = capacitorTrend(ms, QuantityCapacitance, initial.CapacitanceUF, p)
	r.ESR, r.HasESR = capacitorTrend(ms, QuantityESR, initial.ESRMilliohm, p)
	for _, t := range []CapacitorTrend{r.Capacitance, r.ESR} {
		if t.Crossed && (!r.Crossed || t.CrossedAt < r.CrossedAt) {
			r.Crossed, r.CrossedAt, r.DecidedBy = true, t.CrossedAt, t.Quantity
		}
	}
	for _, t := range []CapacitorTrend{r.Capacitance, r.ESR} {
		if t.Projected && (!r.Projected || t.ProjectedAt < r.ProjectedAt) {
			r.Projected, r.ProjectedAt = true, t.ProjectedAt
			if !r.Crossed {
				r.DecidedBy = t.Quantity
			}
		}
	}
	if r.Crossed {
		r.Projected, r.ProjectedAt = true, r.CrossedAt
	}
	return r, nil
}

// capacitorTrend evaluates one quantity; ok is false when it was never
// reported.
func capacitorTrend(ms []CapacitorMeasurement, q string, initial float64, p CapacitorParams) (CapacitorTrend, bool) {
	t := CapacitorTrend{Quantity: q, Unit: "uF"}
	falling := q == QuantityCapacitance
	if !falling {
		t.Unit = "milliohm"
	}
	var ats []int64
	var xs, ys []float64
	for _, m := range ms {
		v := m.CapacitanceUF
		if !falling {
			v = m.ESRMilliohm
		}
		if !lifeFinite(v) || v <= 0 {
			continue
		}
		ats = append(ats, m.At)
		ys = append(ys, v)
	}
	if len(ys) == 0 {
		return t, false
	}
	t.Points = len(ys)
	t.Initial = ys[0]
	if initial > 0 {
		t.Initial = initial
	}
	t.Latest, t.LatestAt = ys[len(ys)-1], ats[len(ats)-1]
	past := func(v float64) bool { return v >= t.Limit }
	if falling {
		t.Limit = t.Initial * p.CapacitanceEndFraction
		t.Progress = (t.Initial - t.Latest) / (t.Initial - t.Limit)
		past = func(v float64) bool { return v <= t.Limit }
	} else {
		t.Limit = t.Initial * p.ESREndFactor
		t.Progress = (t.Latest - t.Initial) / (t.Limit - t.Initial)
	}
	if past(t.Latest) {
		t.Crossed = true
		i := len(ys) - 1
		for i > 0 && past(ys[i-1]) {
			i--
		}
		t.CrossedAt = ats[i]
		t.Projected, t.ProjectedAt = true, t.CrossedAt
		return t, true
	}
	if len(ys) < p.MinTrendPoints || ats[len(ats)-1] == ats[0] {
		return t, true
	}
	xs = make([]float64, len(ats))
	for i, a := range ats {
		xs[i] = float64(a-ats[0]) / lifeSecondsPerDay
	}
	alpha, beta := stat.LinearRegression(xs, ys, nil, false)
	t.SlopePerDay = beta
	if (falling && beta < 0) || (!falling && beta > 0) {
		days := (t.Limit - alpha) / beta
		if days*24 <= lifeMaxProjectionH {
			t.Projected = true
			t.ProjectedAt = max(ats[0]+int64(math.Round(days*lifeSecondsPerDay)), t.LatestAt)
		}
	}
	return t, true
}

// capacitorRules lists every rule the capacitor model can raise.
var capacitorRules = []RuleInfo{
	{ID: "capacitor.end_of_life", Kind: KindCapacitor, Title: "DC-bus capacitors at end of life", Remedy: remedyCapacitorEnd},
	{ID: "capacitor.end_of_life_near", Kind: KindCapacitor, Title: "DC-bus capacitors near end of life", Remedy: remedyCapacitorNear},
	{ID: "capacitor.measured_degradation", Kind: KindCapacitor, Title: "DC-bus capacitance or ESR drifting toward its limit", Remedy: remedyCapacitorMeasured},
}

const (
	remedyCapacitorEnd      = "Replace the DC-bus capacitors, or the drive, at the next opportunity; until then keep the drive as cool and lightly loaded as the process allows."
	remedyCapacitorNear     = "Plan capacitor replacement before the projected date: order the parts and book the outage."
	remedyCapacitorMeasured = "Confirm with an off-line capacitance and ESR measurement and plan capacitor replacement."
	sourceTenDegree         = "capacitor makers' application notes (10-degree rule) and the Palmgren–Miner rule"
	sourceArrhenius         = "Arrhenius law and the Palmgren–Miner rule"
	sourceEndurance         = "capacitor datasheet endurance limits"
)

// CapacitorFindings turns a capacitor's life report and measured report into
// findings at the assessment time at (Unix seconds):
//
//   - capacitor.end_of_life (critical): life used D >= 1 (Palmgren–Miner) or
//     a measured limit crossed (capacitor datasheet endurance limits);
//   - capacitor.end_of_life_near: the earlier of the thermal and the
//     measured-trend projections falls within HorizonDays of at; major
//     within MajorWithinDays, else minor (common practice);
//   - capacitor.measured_degradation: a measured value at least
//     WarnProgressFraction of the way to its limit (minor) or
//     MajorProgressFraction (major), while no limit is crossed.
//
// A measured report with neither quantity is ignored. Valid for any report
// the functions of this package produce.
func CapacitorFindings(p CapacitorParams, life CapacitorLifeReport, meas CapacitorMeasuredReport, at int64) []Finding {
	var out []Finding
	thermalSource := sourceTenDegree
	if life.Law == "Arrhenius" {
		thermalSource = sourceArrhenius
	}
	lifeEv := []Evidence{
		{Name: "life_used_fraction", Value: life.LifeUsedFraction, Limit: 1.0, Source: thermalSource},
		{Name: "mean_core_temp_c", Value: lifeNaNToNil(life.MeanTempC), Unit: "°C"},
		{Name: "equivalent_core_temp_c", Value: lifeNaNToNil(life.EquivalentCoreC), Unit: "°C"},
		{Name: "reference_core_temp_c", Value: life.RefTempC, Unit: "°C"},
		{Name: "rated_life_h", Value: life.RatedLifeH, Unit: "h"},
	}
	if life.EndReached || meas.Crossed {
		ev := []Evidence{}
		msg := ""
		if life.EndReached {
			msg = fmt.Sprintf("The DC-bus capacitors have used %.0f %% of their rated life (%s), reached on %s.",
				life.LifeUsedFraction*100, life.Law, lifeDate(life.EndReachedAt))
			ev = append(ev, lifeEv...)
		}
		if meas.Crossed {
			t := meas.Capacitance
			if meas.DecidedBy == QuantityESR {
				t = meas.ESR
			}
			if msg != "" {
				msg += " "
			}
			msg += fmt.Sprintf("The reported %s is %.4g %s against an end-of-life limit of %.4g %s (initial %.4g), past it since %s.",
				t.Quantity, t.Latest, t.Unit, t.Limit, t.Unit, t.Initial, lifeDate(t.CrossedAt))
			ev = append(ev, capacitorMeasuredEvidence(meas)...)
		}
		return append(out, Finding{PhysicalWork: true, Rule: "capacitor.end_of_life", Kind: KindCapacitor, Severity: SeverityCritical,
			Message: msg, Evidence: ev, Remedy: remedyCapacitorEnd})
	}
	// The earlier of the two projections.
	eol, by := int64(0), ""
	if life.Projected {
		eol, by = life.EndOfLifeAt, "thermal life ("+life.Law+")"
	}
	if meas.Projected && (by == "" || meas.ProjectedAt < eol) {
		eol, by = meas.ProjectedAt, "measured "+meas.DecidedBy+" trend"
	}
	if by != "" {
		days := float64(eol-at) / lifeSecondsPerDay
		if days <= p.HorizonDays {
			sev := SeverityMinor
			if days <= p.MajorWithinDays {
				sev = SeverityMajor
			}
			ev := []Evidence{
				{Name: "projected_end_of_life", Value: lifeDate(eol), Source: by},
				{Name: "days_to_end_of_life", Value: math.Round(days*10) / 10, Unit: "d", Limit: p.HorizonDays, Source: "common practice"},
				{Name: "major_within_days", Value: p.MajorWithinDays, Unit: "d", Source: "common practice"},
			}
			if life.Projected {
				ev = append(ev,
					Evidence{Name: "remaining_h", Value: life.RemainingH, Unit: "h", Source: thermalSource},
					Evidence{Name: "remaining_at_present_conditions_h", Value: lifeInfToNil(life.RemainingAtPresentH), Unit: "h", Source: thermalSource},
					Evidence{Name: "end_of_life_earliest", Value: lifeDate(life.EndOfLifeEarliestAt), Source: "harshest month of the trailing year"})
				if life.EndOfLifeLatestAt != 0 {
					ev = append(ev, Evidence{Name: "end_of_life_latest", Value: lifeDate(life.EndOfLifeLatestAt), Source: "mildest month of the trailing year"})
				}
				ev = append(ev, lifeEv...)
			}
			if meas.HasCapacitance || meas.HasESR {
				ev = append(ev, capacitorMeasuredEvidence(meas)...)
			}
			msg := fmt.Sprintf("The DC-bus capacitors are projected to reach end of life on %s, in %.0f days, by %s.", lifeDate(eol), days, by)
			if days <= 0 {
				msg = fmt.Sprintf("By %s the DC-bus capacitors are projected to have reached end of life on %s, before this assessment; the readings so far do not show it.",
					by, lifeDate(eol))
			}
			out = append(out, Finding{PhysicalWork: true, Rule: "capacitor.end_of_life_near", Kind: KindCapacitor, Severity: sev,
				Message: msg, Evidence: ev, Remedy: remedyCapacitorNear})
		}
	}
	worst := CapacitorTrend{}
	for _, t := range []CapacitorTrend{meas.Capacitance, meas.ESR} {
		if t.Points > 0 && t.Progress >= p.WarnProgressFraction && t.Progress > worst.Progress {
			worst = t
		}
	}
	if worst.Points > 0 {
		sev := SeverityMinor
		if worst.Progress >= p.MajorProgressFraction {
			sev = SeverityMajor
		}
		msg := fmt.Sprintf("The reported %s is %.4g %s, %.0f %% of the way from its initial %.4g %s to the end-of-life limit of %.4g %s.",
			worst.Quantity, worst.Latest, worst.Unit, worst.Progress*100, worst.Initial, worst.Unit, worst.Limit, worst.Unit)
		ev := append([]Evidence{
			{Name: worst.Quantity + "_progress_fraction", Value: worst.Progress, Limit: p.WarnProgressFraction, Source: "common practice"},
		}, capacitorMeasuredEvidence(meas)...)
		out = append(out, Finding{PhysicalWork: true, Rule: "capacitor.measured_degradation", Kind: KindCapacitor, Severity: sev,
			Message: msg, Evidence: ev, Remedy: remedyCapacitorMeasured})
	}
	return out
}

// capacitorMeasuredEvidence lists the measured values against their limits.
func capacitorMeasuredEvidence(m CapacitorMeasuredReport) []Evidence {
	var ev []Evidence
	for _, t := range []CapacitorTrend{m.Capacitance, m.ESR} {
		if t.Points == 0 {
			continue
		}
		ev = append(ev,
			Evidence{Name: t.Quantity + "_latest", Value: t.Latest, Unit: t.Unit, Limit: t.Limit, Source: sourceEndurance},
			Evidence{Name: t.Quantity + "_initial", Value: t.Initial, Unit: t.Unit})
		if t.Projected && !t.Crossed {
			ev = append(ev, Evidence{Name: t.Quantity + "_projected_limit_date", Value: lifeDate(t.ProjectedAt), Source: "least-squares trend"})
		}
	}
	return ev
}

// lifeDate formats Unix seconds as an RFC 3339 UTC timestamp.
func lifeDate(sec int64) string { return time.Unix(sec, 0).UTC().Format(time.RFC3339) }

// lifeNaNToNil returns nil for NaN so that evidence stays JSON-encodable.
func lifeNaNToNil(x float64) any {
	if math.IsNaN(x) {
		return nil
	}
	return x
}

// lifeInfToNil returns nil for a non-finite value so that evidence stays
// JSON-encodable.
func lifeInfToNil(x float64) any {
	if !lifeFinite(x) {
		return nil
	}
	return x
}
