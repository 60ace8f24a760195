package health

import (
	"errors"
	"fmt"
	"math"
	"slices"
)

// This file holds the ratings of a drive model and the derate factors that
// turn its rated current into the current it may carry continuously where it
// is installed (DESIGN.md section 3, "Derating and duty").

// Sources quoted in factors and evidence.
const (
	dutySrcAmbientDerate  = "common practice: about 1 % of rated current per °C above the rated ambient, up to the model's maximum ambient; per model"
	dutySrcAltitudeDerate = "IEC 61800-2 (1000 m rating point); about 1 % of rated current per 100 m above it, common practice; per model"
	dutySrcCarrierDerate  = "model's carrier derate table, linear between points (common practice: switching losses grow roughly in proportion to carrier frequency)"
	dutySrcSinglePhase    = "common practice: a three-phase drive on a single-phase supply is cut to about 50-58 % of rated current; per model"
	dutySrcDutyClass      = "common practice: normal duty about 110 % for 60 s, heavy duty about 150 % for 60 s, every 600 s"
	dutySrcInsulation     = "IEC 60664-1 (insulation clearances above 2000 m)"
	dutySrcLosses         = "common practice: drive losses about 2-3 % of rated power at the rated point"
	dutySrcBusTripDefault = "from memory: over-voltage trip roughly 800-830 V DC for the 400/480 V class, about 1.2 × the peak of the nominal line voltage"
)

// Factor names as they appear in Factor.Name and the API's current.factors.
const (
	FactorAmbient  = "ambient"
	FactorAltitude = "altitude"
	FactorCarrier  = "carrier"
	FactorSupply   = "supply_phases"
)

// CarrierPoint is one point of a model's carrier derate table: at KHz the
// continuous current is Factor times the rated current.
type CarrierPoint struct {
	KHz    float64 `json:"carrier_khz"`
	Factor float64 `json:"factor_fraction"`
}

// OverloadAllowance is the short-time overload a duty class allows: Fraction
// times the allowed continuous current for DurationS seconds, once every
// EveryS seconds.
type OverloadAllowance struct {
	Fraction  float64 `json:"fraction"`
	DurationS float64 `json:"duration_s"`
	EveryS    float64 `json:"every_s"`
}

// Ratings are the nameplate and derating data of a drive model. Currents are
// output currents in amperes, powers shaft powers in kilowatts. Every field
// has a default in DefaultRatings except the currents and powers, which only
// the model's data sheet can give.
type Ratings struct {
	// VoltageClassV is the nominal supply line-to-line voltage (for example 400 or 480).
	VoltageClassV float64 `json:"voltage_class_v"`
	// SupplyPhases is the supply the model is rated for: 3 or 1.
	SupplyPhases int `json:"supply_phases"`
	// NormalDutyA and HeavyDutyA are the rated continuous output currents per duty class.
	NormalDutyA float64 `json:"normal_duty_a"`
	HeavyDutyA  float64 `json:"heavy_duty_a"`
	// NormalDutyKW and HeavyDutyKW are the rated powers per duty class.
	NormalDutyKW float64 `json:"normal_duty_kw"`
	HeavyDutyKW  float64 `json:"heavy_duty_kw"`
	// NormalOverload and HeavyOverload are the short-time overloads per duty class.
	NormalOverload OverloadAllowance `json:"normal_overload"`
	HeavyOverload  OverloadAllowance `json:"heavy_overload"`
	// RatedAmbientC is the air temperature at the drive up to which it carries rated current.
	RatedAmbientC float64 `json:"rated_ambient_c"`
	// AmbientSlopePerC is the derate per °C above RatedAmbientC, as a fraction of rated current.
	AmbientSlopePerC float64 `json:"ambient_slope_fraction_per_c"`
	// MaxAmbientC is the highest ambient at which the drive may run at all.
	MaxAmbientC float64 `json:"max_ambient_c"`
	// AltitudeRatingM is the elevation up to which the drive carries rated current.
	AltitudeRatingM float64 `json:"altitude_rating_m"`
	// AltitudeSlopePer100M is the derate per 100 m above AltitudeRatingM, as a fraction.
	AltitudeSlopePer100M float64 `json:"altitude_slope_fraction_per_100m"`
	// MaxAltitudeM is the highest elevation at which the drive may run at all.
	MaxAltitudeM float64 `json:"max_altitude_m"`
	// DefaultCarrierKHz is the switching frequency at which the rated currents hold.
	DefaultCarrierKHz float64 `json:"default_carrier_khz"`
	// CarrierTable gives factors above DefaultCarrierKHz; kHz rising, factors not rising.
	CarrierTable []CarrierPoint `json:"carrier_table"`
	// SinglePhaseFactor is the model's derate for a single-phase supply (three-phase models).
	SinglePhaseFactor float64 `json:"single_phase_factor_fraction"`
	// LossFraction is the drive's losses at the rated point as a fraction of rated power.
	LossFraction float64 `json:"loss_fraction"`
	// BusTripV is the DC-bus over-voltage trip threshold.
	BusTripV float64 `json:"bus_trip_v"`
}

// DefaultRatings returns the defaults for a model of the given voltage class
// with its currents and powers left at zero for the caller to fill:
//
//   - three-phase supply; normal duty 110 % and heavy duty 150 % for 60 s
//     every 600 s (common practice);
//   - rated ambient 40 °C, 1 % per °C above it, maximum 50 °C (common
//     practice; open-chassis IP20 models are often rated 50 °C, per model);
//   - rated to 1000 m (IEC 61800-2 rating point), 1 % per 100 m above
//     (common practice), maximum 3000 m (from memory; per model);
//   - default carrier 4 kHz with factors 0.90 at 6 kHz, 0.80 at 8 kHz,
//     0.65 at 12 kHz and 0.55 at 16 kHz (from memory: a typical shape of
//     the tables in makers' manuals; per model);
//   - single-phase factor 0.50 (common practice range 0.50-0.58);
//   - losses 2.5 % of rated power at the rated point (common practice 2-3 %);
//   - DC-bus trip DefaultBusTripV(voltageClassV) (from memory).
func DefaultRatings(voltageClassV float64) Ratings {
	return Ratings{
		VoltageClassV:        voltageClassV,
		SupplyPhases:         3,
		NormalOverload:       OverloadAllowance{Fraction: 1.10, DurationS: 60, EveryS: 600},
		HeavyOverload:        OverloadAllowance{Fraction: 1.50, DurationS: 60, EveryS: 600},
		RatedAmbientC:        40,
		AmbientSlopePerC:     0.01,
		MaxAmbientC:          50,
		AltitudeRatingM:      1000,
		AltitudeSlopePer100M: 0.01,
		MaxAltitudeM:         3000,
		DefaultCarrierKHz:    4,
		CarrierTable: []CarrierPoint{
			{KHz: 6, Factor: 0.90}, {KHz: 8, Factor: 0.80}, {KHz: 12, Factor: 0.65}, {KHz: 16, Factor: 0.55},
		},
		SinglePhaseFactor: 0.50,
		LossFraction:      0.025,
		BusTripV:          DefaultBusTripV(voltageClassV),
	}
}

// DefaultBusTripV estimates a model's DC-bus over-voltage trip threshold from
// its voltage class when the data sheet does not give it:
//
//	V_trip ≈ 1.2 × √2 × V_class
//
// which gives 815 V for the 480 V class, inside the 800-830 V DC that 400/480 V
// drives commonly use (from memory), and about 390-410 V for the 230/240 V
// class. Valid as a rough default for 200-690 V classes only; a model's own
// figure always wins.
func DefaultBusTripV(voltageClassV float64) float64 {
	return 1.2 * math.Sqrt2 * voltageClassV
}

// Validate reports every inconsistent field of the ratings.
func (r Ratings) Validate() error {
	var errs []error
	bad := func(format string, a ...any) { errs = append(errs, fmt.Errorf(format, a...)) }
	if !(r.VoltageClassV > 0) {
		bad("voltage_class_v must be positive, got %v", r.VoltageClassV)
	}
	if r.SupplyPhases != 1 && r.SupplyPhases != 3 {
		bad("supply_phases must be 1 or 3, got %d", r.SupplyPhases)
	}
	if !(r.NormalDutyA > 0) && !(r.HeavyDutyA > 0) {
		bad("a rated current for normal or heavy duty is required")
	}
	for _, f := range []struct {
		name string
		v    float64
	}{
		{"normal_duty_a", r.NormalDutyA}, {"heavy_duty_a", r.HeavyDutyA},
		{"normal_duty_kw", r.NormalDutyKW}, {"heavy_duty_kw", r.HeavyDutyKW},
		{"ambient_slope_fraction_per_c", r.AmbientSlopePerC},
		{"altitude_slope_fraction_per_100m", r.AltitudeSlopePer100M},
		{"altitude_rating_m", r.AltitudeRatingM},
		{"default_carrier_khz", r.DefaultCarrierKHz},
		{"loss_fraction", r.LossFraction},
		{"bus_trip_v", r.BusTripV},
	} {
		if !(f.v >= 0) || math.IsInf(f.v, 0) {
			bad("%s must be a finite number not below 0, got %v", f.name, f.v)
		}
	}
	for _, o := range []struct {
		name string
		v    OverloadAllowance
	}{{"normal_overload", r.NormalOverload}, {"heavy_overload", r.HeavyOverload}} {
		if !(o.v.Fraction >= 1) || !(o.v.DurationS > 0) || !(o.v.EveryS >= o.v.DurationS) {
			bad("%s needs fraction >= 1 and 0 < duration_s <= every_s, got %+v", o.name, o.v)
		}
	}
	if math.IsNaN(r.RatedAmbientC) || !(r.MaxAmbientC >= r.RatedAmbientC) {
		bad("max_ambient_c (%v) must not be below rated_ambient_c (%v)", r.MaxAmbientC, r.RatedAmbientC)
	}
	if !(r.MaxAltitudeM >= r.AltitudeRatingM) {
		bad("max_altitude_m (%v) must not be below altitude_rating_m (%v)", r.MaxAltitudeM, r.AltitudeRatingM)
	}
	if !(r.SinglePhaseFactor >= 0 && r.SinglePhaseFactor <= 1) {
		bad("single_phase_factor_fraction must lie in [0, 1], got %v", r.SinglePhaseFactor)
	}
	prevK, prevF := r.DefaultCarrierKHz, 1.0
	for i, p := range r.CarrierTable {
		if !(p.KHz > prevK) {
			bad("carrier_table[%d]: carrier_khz %v must rise above %v", i, p.KHz, prevK)
		}
		if !(p.Factor >= 0 && p.Factor <= prevF) {
			bad("carrier_table[%d]: factor %v must lie in [0, %v] (factors may not rise with carrier)", i, p.Factor, prevF)
		}
		prevK, prevF = p.KHz, p.Factor
	}
	return errors.Join(errs...)
}

// DutyRating is the rating of one duty class.
type DutyRating struct {
	Duty     Duty              `json:"duty"`
	RatedA   float64           `json:"rated_a"`
	RatedKW  float64           `json:"rated_kw"`
	Overload OverloadAllowance `json:"overload"`
}

// Rated returns the rating of a duty class. An unknown or empty duty class
// is read as normal duty; a model that gives only one class answers with
// that class, and says which in the result's Duty.
func (r Ratings) Rated(d Duty) DutyRating {
	heavy := d == DutyHeavy
	if heavy && !(r.HeavyDutyA > 0) {
		heavy = false
	}
	if !heavy && !(r.NormalDutyA > 0) && r.HeavyDutyA > 0 {
		heavy = true
	}
	if heavy {
		return DutyRating{Duty: DutyHeavy, RatedA: r.HeavyDutyA, RatedKW: r.HeavyDutyKW, Overload: r.HeavyOverload}
	}
	return DutyRating{Duty: DutyNormal, RatedA: r.NormalDutyA, RatedKW: r.NormalDutyKW, Overload: r.NormalOverload}
}

// RatedLossesW returns the drive's losses at the rated point of a duty class:
//
//	P_loss,rated = LossFraction × P_rated
//
// LossFraction about 0.02-0.03 (common practice). Valid for the rated point
// only; use DriveLossesW for other loads.
func (r Ratings) RatedLossesW(d Duty) float64 {
	return r.LossFraction * r.Rated(d).RatedKW * 1000
}

// DerateFactor is one derate factor with what it was computed from. Value
// lies in [0, 1]; 0 means the drive is outside its rating at that input.
type DerateFactor struct {
	Name   string  `json:"name"`
	Value  float64 `json:"value_fraction"`
	Input  float64 `json:"input"`
	Unit   string  `json:"unit"`
	Source string  `json:"source"`
	Note   string  `json:"note,omitempty"`
}

// OutOfRating reports whether the factor is zero: the input lies beyond what
// the model is rated for.
func (f DerateFactor) OutOfRating() bool { return f.Value <= 0 }

// AmbientFactor is the derate for the air temperature at the drive:
//
//	f = 1                                   T <= T_rated
//	f = 1 - s × (T - T_rated)               T_rated < T <= T_max
//	f = 0                                   T > T_max (out of rating)
//
// with s = AmbientSlopePerC (default 0.01 per °C), clamped to [0, 1]. Source:
// common practice, per model (DESIGN.md section 3). Valid for ambient
// temperatures the model's data sheet covers; below the minimum operating
// temperature the factor stays 1 (cold is judged elsewhere). A NaN ambient
// is an error.
func AmbientFactor(r Ratings, ambientC float64) (DerateFactor, error) {
	if math.IsNaN(ambientC) || math.IsInf(ambientC, 0) {
		return DerateFactor{}, fmt.Errorf("ambient factor: ambient temperature %v is not a number", ambientC)
	}
	f := DerateFactor{Name: FactorAmbient, Input: ambientC, Unit: "°C", Source: dutySrcAmbientDerate, Value: 1}
	switch {
	case ambientC > r.MaxAmbientC:
		f.Value = 0
		f.Note = fmt.Sprintf("above the model's maximum ambient of %.1f °C", r.MaxAmbientC)
	case ambientC > r.RatedAmbientC:
		f.Value = drClamp01(1 - r.AmbientSlopePerC*(ambientC-r.RatedAmbientC))
		f.Note = fmt.Sprintf("%.1f K above the rated ambient of %.1f °C", ambientC-r.RatedAmbientC, r.RatedAmbientC)
	}
	return f, nil
}

// AltitudeFactor is the derate for site elevation:
//
//	f = 1                                   h <= h_rated
//	f = 1 - s × (h - h_rated) / 100         h_rated < h <= h_max
//	f = 0                                   h > h_max (out of rating)
//
// with h_rated = AltitudeRatingM (default 1000 m, the IEC 61800-2 rating
// point) and s = AltitudeSlopePer100M (default 0.01, common practice),
// clamped to [0, 1]. It covers the thinner air's poorer cooling only; above
// about 2000 m insulation clearances need checking too (IEC 60664-1). Valid
// from sea level (negative elevations give 1) to the model's maximum.
func AltitudeFactor(r Ratings, altitudeM float64) (DerateFactor, error) {
	if math.IsNaN(altitudeM) || math.IsInf(altitudeM, 0) {
		return DerateFactor{}, fmt.Errorf("altitude factor: elevation %v is not a number", altitudeM)
	}
	f := DerateFactor{Name: FactorAltitude, Input: altitudeM, Unit: "m", Source: dutySrcAltitudeDerate, Value: 1}
	switch {
	case altitudeM > r.MaxAltitudeM:
		f.Value = 0
		f.Note = fmt.Sprintf("above the model's maximum elevation of %.0f m", r.MaxAltitudeM)
	case altitudeM > r.AltitudeRatingM:
		f.Value = drClamp01(1 - r.AltitudeSlopePer100M*(altitudeM-r.AltitudeRatingM)/100)
		f.Note = fmt.Sprintf("%.0f m above the rating point of %.0f m", altitudeM-r.AltitudeRatingM, r.AltitudeRatingM)
	}
	return f, nil
}

// CarrierFactor is the derate for the switching (carrier) frequency:
//
//	f = 1                                   f_c <= f_default
//	f = linear interpolation in the table   f_default < f_c <= last point
//	f = 0                                   f_c above the table (out of rating)
//
// The point (DefaultCarrierKHz, 1) anchors the table. Source: the model's
// table (common practice: switching losses grow roughly in proportion to
// frequency, so makers publish a falling current). A carrier of 0 or NaN
// means "the model's default" and gives 1. Valid within the table; the
// model gives no rating beyond its last point.
func CarrierFactor(r Ratings, carrierKHz float64) (DerateFactor, error) {
	if math.IsInf(carrierKHz, 0) || carrierKHz < 0 {
		return DerateFactor{}, fmt.Errorf("carrier factor: carrier %v kHz is not a usable frequency", carrierKHz)
	}
	if math.IsNaN(carrierKHz) || carrierKHz == 0 {
		carrierKHz = r.DefaultCarrierKHz
	}
	f := DerateFactor{Name: FactorCarrier, Input: carrierKHz, Unit: "kHz", Source: dutySrcCarrierDerate, Value: 1}
	if carrierKHz <= r.DefaultCarrierKHz {
		return f, nil
	}
	x0, y0 := r.DefaultCarrierKHz, 1.0
	for _, p := range r.CarrierTable {
		if carrierKHz <= p.KHz {
			f.Value = drClamp01(y0 + (p.Factor-y0)*(carrierKHz-x0)/(p.KHz-x0))
			f.Note = fmt.Sprintf("above the default carrier of %.1f kHz", r.DefaultCarrierKHz)
			return f, nil
		}
		x0, y0 = p.KHz, p.Factor
	}
	f.Value = 0
	f.Note = fmt.Sprintf("above the highest carrier the model's table covers (%.1f kHz)", x0)
	return f, nil
}

// SupplyFactor is the derate for the supply the drive is fed from:
//
//	f = 1                           supply as rated (or phases unknown: 0)
//	f = configured                  three-phase model, single-phase supply, factor set at the position
//	f = SinglePhaseFactor           three-phase model, single-phase supply, nothing set at the position
//
// configured is the factor the position registers (0 when none). Source:
// common practice, 0.50-0.58 per model: on one line pair the rectifier
// conducts in short, tall pulses and the bus capacitors carry far more ripple
// current. Valid for supplyPhases 0 (as rated), 1 or 3.
func SupplyFactor(r Ratings, supplyPhases int, configured float64) (DerateFactor, error) {
	if supplyPhases != 0 && supplyPhases != 1 && supplyPhases != 3 {
		return DerateFactor{}, fmt.Errorf("supply factor: supply phases must be 0 (as rated), 1 or 3, got %d", supplyPhases)
	}
	if math.IsNaN(configured) || configured < 0 || configured > 1 {
		return DerateFactor{}, fmt.Errorf("supply factor: configured single-phase factor %v must lie in [0, 1]", configured)
	}
	f := DerateFactor{Name: FactorSupply, Input: float64(supplyPhases), Unit: "phases", Source: dutySrcSinglePhase, Value: 1}
	if supplyPhases == 0 {
		f.Input = float64(r.SupplyPhases)
	}
	if supplyPhases != 1 || r.SupplyPhases == 1 {
		return f, nil
	}
	if configured > 0 {
		f.Value = configured
		f.Note = "single-phase supply; factor set at the position"
		return f, nil
	}
	f.Value = drClamp01(r.SinglePhaseFactor)
	f.Note = "single-phase supply; no factor set at the position, the model's single-phase factor applies"
	return f, nil
}

// Application is how a drive is applied at its position: what the derate
// factors are computed from.
type Application struct {
	// Duty is the duty class the drive is applied in.
	Duty Duty `json:"duty"`
	// AmbientC is the air at the drive: inside its cabinet when it has one,
	// the design value or a measured one (the caller chooses).
	AmbientC float64 `json:"ambient_c"`
	// AltitudeM is the site elevation.
	AltitudeM float64 `json:"altitude_m"`
	// CarrierKHz is the switching frequency set in the drive; 0 for the model's default.
	CarrierKHz float64 `json:"carrier_khz"`
	// SupplyPhases is what feeds the drive: 3, 1, or 0 for "as the model is rated".
	SupplyPhases int `json:"supply_phases"`
	// SinglePhaseFactor is the derate set at the position for a
	// single-phase supply; 0 when none is set.
	SinglePhaseFactor float64 `json:"single_phase_factor_fraction"`
}

// Allowance is the current a drive may carry continuously where it is
// applied, with every factor behind it.
type Allowance struct {
	Duty     Duty              `json:"duty"`
	RatedA   float64           `json:"rated_a"`
	AllowedA float64           `json:"allowed_a"`
	Overload OverloadAllowance `json:"overload"`
	Factors  []DerateFactor    `json:"factors"`
}

// OutOfRating returns the factors that are zero.
func (a Allowance) OutOfRating() []DerateFactor {
	var out []DerateFactor
	for _, f := range a.Factors {
		if f.OutOfRating() {
			out = append(out, f)
		}
	}
	return out
}

// Factor returns the factor with the given name and whether it exists.
func (a Allowance) Factor(name string) (DerateFactor, bool) {
	i := slices.IndexFunc(a.Factors, func(f DerateFactor) bool { return f.Name == name })
	if i < 0 {
		return DerateFactor{}, false
	}
	return a.Factors[i], true
}

// AllowedCurrent is the continuous output current the drive may carry:
//
//	I_allowed = I_rated(duty) × f_ambient × f_altitude × f_carrier × f_supply
//
// each factor from AmbientFactor, AltitudeFactor, CarrierFactor and
// SupplyFactor and reported on its own. Source: common practice (DESIGN.md
// section 3); the factors multiply because each removes an independent share
// of the thermal headroom, which is how makers' manuals combine them. Valid
// for ratings that pass Validate; a factor of 0 gives I_allowed = 0 and
// means out of rating, never a small usable number.
func AllowedCurrent(r Ratings, a Application) (Allowance, error) {
	if err := r.Validate(); err != nil {
		return Allowance{}, fmt.Errorf("allowed current: %w", err)
	}
	amb, err := AmbientFactor(r, a.AmbientC)
	if err != nil {
		return Allowance{}, fmt.Errorf("allowed current: %w", err)
	}
	alt, err := AltitudeFactor(r, a.AltitudeM)
	if err != nil {
		return Allowance{}, fmt.Errorf("allowed current: %w", err)
	}
	car, err := CarrierFactor(r, a.CarrierKHz)
	if err != nil {
		return Allowance{}, fmt.Errorf("allowed current: %w", err)
	}
	sup, err := SupplyFactor(r, a.SupplyPhases, a.SinglePhaseFactor)
	if err != nil {
		return Allowance{}, fmt.Errorf("allowed current: %w", err)
	}
	dr := r.Rated(a.Duty)
	out := Allowance{Duty: dr.Duty, RatedA: dr.RatedA, Overload: dr.Overload, Factors: []DerateFactor{amb, alt, car, sup}}
	out.AllowedA = dr.RatedA
	for _, f := range out.Factors {
		out.AllowedA *= f.Value
	}
	return out, nil
}

// DeratingParams are the thresholds of the derating and environment rules.
type DeratingParams struct {
	// AmbientMajorExcessK: design ambient more than this above the rated
	// ambient makes environment.ambient_above_rating major instead of minor.
	AmbientMajorExcessK float64 `json:"ambient_major_excess_k"`
	// InsulationCheckM: above this elevation environment.altitude_insulation
	// is raised (IEC 60664-1 tables start their altitude correction at 2000 m).
	InsulationCheckM float64 `json:"insulation_check_m"`
}

// DefaultDeratingParams returns 5 K (kelvard's choice: 5 % of rated current
// at the usual 1 %/°C slope) and 2000 m (IEC 60664-1).
func DefaultDeratingParams() DeratingParams {
	return DeratingParams{AmbientMajorExcessK: 5, InsulationCheckM: 2000}
}

// DeratingFindings judges the application against the ratings and returns
// the findings that do not need readings:
//
//   - derating.out_of_rating (critical): any factor of the allowance is 0, or
//     designAmbientMaxC is above the model's maximum ambient;
//   - derating.single_phase_supply (major): a three-phase model fed single
//     phase with no factor set at the position;
//   - environment.ambient_above_rating: designAmbientMaxC above the rated
//     ambient but not above the maximum; minor up to AmbientMajorExcessK
//     above, major beyond;
//   - environment.altitude_insulation (advice): elevation above
//     InsulationCheckM (IEC 60664-1).
//
// designAmbientMaxC is the area's design maximum for a drive in the open
// room; pass NaN for a drive in a cabinet (the cabinet model judges its air).
// Valid for an allowance from AllowedCurrent with the same ratings.
func DeratingFindings(r Ratings, app Application, al Allowance, designAmbientMaxC float64, p DeratingParams) []Finding {
	var out []Finding
	var oor []Evidence
	for _, f := range al.OutOfRating() {
		limit := any(nil)
		switch f.Name {
		case FactorAmbient:
			limit = r.MaxAmbientC
		case FactorAltitude:
			limit = r.MaxAltitudeM
		case FactorCarrier:
			if n := len(r.CarrierTable); n > 0 {
				limit = r.CarrierTable[n-1].KHz
			} else {
				limit = r.DefaultCarrierKHz
			}
		}
		oor = append(oor, Evidence{Name: f.Name + " (" + f.Note + ")", Value: f.Input, Unit: f.Unit, Limit: limit, Source: f.Source})
	}
	designOver := designAmbientMaxC > r.MaxAmbientC
	if designOver {
		oor = append(oor, Evidence{Name: "area design maximum ambient", Value: designAmbientMaxC, Unit: "°C", Limit: r.MaxAmbientC, Source: dutySrcAmbientDerate})
	}
	if len(oor) > 0 {
		out = append(out, drFinding(deratingRules, "derating.out_of_rating", SeverityCritical,
			fmt.Sprintf("The drive is outside its rating here (%d condition(s) beyond the model's limits): no continuous current is allowed.", len(oor)),
			oor, true))
	}

	if sup, ok := al.Factor(FactorSupply); ok && app.SupplyPhases == 1 && r.SupplyPhases == 3 && !(app.SinglePhaseFactor > 0) {
		ratedA := r.Rated(app.Duty).RatedA
		out = append(out, drFinding(deratingRules, "derating.single_phase_supply", SeverityMajor,
			fmt.Sprintf("A three-phase drive is fed from a single-phase supply without a single-phase derate set at the position; it may carry only about %.0f %% of its rated current (%.1f A of %.1f A before other factors).",
				100*sup.Value, sup.Value*ratedA, ratedA),
			[]Evidence{
				{Name: "supply phases", Value: 1, Limit: r.SupplyPhases},
				{Name: "model single-phase factor", Value: sup.Value, Unit: "fraction", Source: dutySrcSinglePhase},
				{Name: "single-phase factor set at the position", Value: false},
			}, true))
	}

	if !designOver && designAmbientMaxC > r.RatedAmbientC {
		fac, _ := AmbientFactor(r, designAmbientMaxC)
		excess := designAmbientMaxC - r.RatedAmbientC
		sev := SeverityMinor
		if excess > p.AmbientMajorExcessK {
			sev = SeverityMajor
		}
		out = append(out, drFinding(deratingRules, "environment.ambient_above_rating", sev,
			fmt.Sprintf("The area's design maximum of %.1f °C is %.1f K above the drive's rated ambient of %.1f °C; the drive must be derated to %.0f %% of its rated current on the hottest days.",
				designAmbientMaxC, excess, r.RatedAmbientC, 100*fac.Value),
			[]Evidence{
				{Name: "area design maximum ambient", Value: designAmbientMaxC, Unit: "°C", Limit: r.RatedAmbientC, Source: dutySrcAmbientDerate},
				{Name: "ambient derate factor", Value: fac.Value, Unit: "fraction"},
				{Name: "excess above which severity is major", Value: excess, Unit: "K", Limit: p.AmbientMajorExcessK, Source: "kelvard default, configurable"},
			}, true))
	}

	if app.AltitudeM > p.InsulationCheckM {
		out = append(out, drFinding(deratingRules, "environment.altitude_insulation", SeverityAdvice,
			fmt.Sprintf("The site stands at %.0f m, above %.0f m: insulation clearances need checking for the thinner air, not only the current derate.", app.AltitudeM, p.InsulationCheckM),
			[]Evidence{{Name: "site elevation", Value: app.AltitudeM, Unit: "m", Limit: p.InsulationCheckM, Source: dutySrcInsulation}}, false))
	}
	return out
}

// deratingRules lists the rules this file raises.
var deratingRules = []RuleInfo{
	{ID: "derating.out_of_rating", Kind: KindDerating, Title: "Drive outside its rating",
		Remedy: "Bring the condition inside the model's limits (cool or ventilate the space, relocate the drive, lower the carrier) or replace it with a model rated for the site."},
	{ID: "derating.single_phase_supply", Kind: KindDerating, Title: "Three-phase drive on a single-phase supply without derate",
		Remedy: "Derate the drive to the model's single-phase factor and confirm the load fits, or fit a drive sized (typically about twice the current) or made for single-phase input; the rectifier conducts on one line pair and the bus capacitors carry far more ripple current."},
	{ID: "environment.ambient_above_rating", Kind: KindEnvironment, Title: "Design ambient above the drive's rated ambient",
		Remedy: "Confirm the load fits the derated current on the hottest days; otherwise ventilate or cool the space, move the drive somewhere cooler, or fit a larger drive."},
	{ID: "environment.altitude_insulation", Kind: KindEnvironment, Title: "Elevation above 2000 m: check insulation",
		Remedy: "Ask the drive maker to confirm insulation clearances and the supply earthing system at this elevation (IEC 60664-1), in addition to the current derate."},
}

// drFinding builds a finding of a rule listed in rules. physical adds the
// safety caution to the remedy, for remedies that involve work on a drive.
// Evidence values and limits that are NaN or infinite become nil (unknown).
func drFinding(rules []RuleInfo, id string, sev Severity, msg string, ev []Evidence, physical bool) Finding {
	i := slices.IndexFunc(rules, func(r RuleInfo) bool { return r.ID == id })
	if i < 0 {
		panic("health: rule " + id + " is not listed") // a programming error, caught by the tests
	}
	remedy := rules[i].Remedy
	for j := range ev { // NaN and infinities cannot be encoded as JSON: an unknown is nil
		ev[j].Value, ev[j].Limit = drFinite(ev[j].Value), drFinite(ev[j].Limit)
	}
	return Finding{Rule: id, Kind: rules[i].Kind, Severity: sev, Message: msg, Evidence: ev, Remedy: remedy, PhysicalWork: physical}
}

// drFinite returns nil for a NaN or infinite float64 and v otherwise.
func drFinite(v any) any {
	if f, ok := v.(float64); ok && (math.IsNaN(f) || math.IsInf(f, 0)) {
		return nil
	}
	return v
}

// drClamp01 limits x to [0, 1]; NaN stays NaN.
func drClamp01(x float64) float64 {
	return math.Max(0, math.Min(1, x))
}
