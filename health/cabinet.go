package health

import (
	"errors"
	"fmt"
	"math"
)

// This file is the heat balance of a cabinet that holds a drive: how warm
// the air around the drive gets from the drive's losses, other equipment and
// the sun, for sealed, fan-ventilated and air-conditioned cabinets.

// Sources quoted in evidence.
const (
	dutySrcSealedCabinet = "enclosure design notes: dT = P / (k × A), k ≈ 5.5 W/m²K painted sheet steel, 3.7 stainless, 3.5 plastic; aluminium about 12 from memory"
	dutySrcSurfaceFactor = "IEC TR 60890 surface factors, from memory: exposed top 1.4, covered top 0.7, exposed side 0.9, covered side 0.5, floor 0"
	dutySrcVentilated    = "physics: dT = P / (rho·cp × V), rho·cp ≈ 1.2 kJ/(m³·K) for air near sea level"
	dutySrcCooler        = "cooler rating: the cabinet holds its set point while the heat load stays within the cooler's rated capacity"
	dutySrcSolar         = "design irradiance 1000 W/m² × absorptance × sunlit area; absorptance about 0.2-0.3 fresh white to 0.9 black"
	dutySrcLossModel     = "from memory (common practice): losses = fixed part + part proportional to current (switching, diode drop) + part proportional to current squared (conduction)"
)

// CabinetPlacement says how a cabinet stands, which sets which of its faces
// can shed heat (IEC TR 60890 installation types, from memory).
type CabinetPlacement string

// Cabinet placements. "Covered" faces touch a wall or a neighbouring
// cabinet; the top is exposed unless Cabinet.TopCovered is set.
const (
	// PlacementFreeStanding: all four sides and the top exposed.
	PlacementFreeStanding CabinetPlacement = "free_standing"
	// PlacementAgainstWall: rear against a wall (also a wall-mounted box).
	PlacementAgainstWall CabinetPlacement = "against_wall"
	// PlacementRowEnd: first or last of a free-standing row; one side covered.
	PlacementRowEnd CabinetPlacement = "row_end"
	// PlacementRowEndAgainstWall: end of a row against a wall; one side and the rear covered.
	PlacementRowEndAgainstWall CabinetPlacement = "row_end_against_wall"
	// PlacementRowMiddle: inside a free-standing row; both sides covered.
	PlacementRowMiddle CabinetPlacement = "row_middle"
	// PlacementRowMiddleAgainstWall: inside a row against a wall; both sides and the rear covered.
	PlacementRowMiddleAgainstWall CabinetPlacement = "row_middle_against_wall"
)

// CabinetPlacements returns every placement.
func CabinetPlacements() []CabinetPlacement {
	return []CabinetPlacement{PlacementFreeStanding, PlacementAgainstWall, PlacementRowEnd,
		PlacementRowEndAgainstWall, PlacementRowMiddle, PlacementRowMiddleAgainstWall}
}

// Valid reports whether p is known.
func (p CabinetPlacement) Valid() bool {
	for _, v := range CabinetPlacements() {
		if p == v {
			return true
		}
	}
	return false
}

// covered returns how many side faces (left and right) and whether the rear
// face touch something.
func (p CabinetPlacement) covered() (sides int, rear bool) {
	switch p {
	case PlacementAgainstWall:
		return 0, true
	case PlacementRowEnd:
		return 1, false
	case PlacementRowEndAgainstWall:
		return 1, true
	case PlacementRowMiddle:
		return 2, false
	case PlacementRowMiddleAgainstWall:
		return 2, true
	}
	return 0, false
}

// Paint is the outside finish of a cabinet, which sets how much sun it
// absorbs.
type Paint string

// Paints, lightest first.
const (
	PaintWhite     Paint = "white"
	PaintLightGrey Paint = "light_grey"
	PaintMidGrey   Paint = "mid_grey"
	PaintDark      Paint = "dark"
	PaintBlack     Paint = "black"
)

// Paints returns every paint, lightest first.
func Paints() []Paint {
	return []Paint{PaintWhite, PaintLightGrey, PaintMidGrey, PaintDark, PaintBlack}
}

// Valid reports whether p is known.
func (p Paint) Valid() bool { return !math.IsNaN(p.Absorptance()) }

// Absorptance returns the solar absorptance of the paint: white 0.25 and
// black 0.90 (DESIGN.md section 3: about 0.2-0.3 fresh white to 0.9 black);
// light grey 0.45, mid grey 0.65 and dark (grey, green, blue) 0.80 from
// memory. White paint darkens with weathering and dirt towards 0.4 (from
// memory). NaN for an unknown paint.
func (p Paint) Absorptance() float64 {
	switch p {
	case PaintWhite:
		return 0.25
	case PaintLightGrey:
		return 0.45
	case PaintMidGrey:
		return 0.65
	case PaintDark:
		return 0.80
	case PaintBlack:
		return 0.90
	}
	return math.NaN()
}

// HeatTransferCoefficient returns k, the heat a cabinet wall of the material
// sheds per m² and per kelvin of inside-to-outside air difference:
// painted sheet steel 5.5, stainless steel 3.7, plastic 3.5 W/m²K
// (enclosure design notes, DESIGN.md section 3) and aluminium 12 W/m²K (from
// memory: the value often quoted). Valid for still air around the cabinet;
// NaN for an unknown material.
func HeatTransferCoefficient(m Material) float64 {
	switch m {
	case MaterialPaintedSteel:
		return 5.5
	case MaterialStainless:
		return 3.7
	case MaterialPlastic:
		return 3.5
	case MaterialAluminium:
		return 12
	}
	return math.NaN()
}

// Cabinet describes a cabinet that holds a drive.
type Cabinet struct {
	Cooling  Cooling  `json:"cooling"`
	Material Material `json:"material"`
	// HeatTransferWM2K overrides the material's coefficient when above 0.
	HeatTransferWM2K float64 `json:"heat_transfer_w_per_m2k"`
	// Outside dimensions.
	HeightM float64 `json:"height_m"`
	WidthM  float64 `json:"width_m"`
	DepthM  float64 `json:"depth_m"`
	// Placement and TopCovered say which faces shed heat.
	Placement  CabinetPlacement `json:"placement"`
	TopCovered bool             `json:"top_covered"`
	// EffectiveAreaM2, when above 0, is used instead of the dimensions
	// (for a cabinet registered with only its effective cooling surface).
	EffectiveAreaM2 float64 `json:"effective_area_m2"`
	// AirflowM3H is the fan's air flow for a fan-ventilated cabinet, m³/h.
	AirflowM3H float64 `json:"airflow_m3_per_h"`
	// CoolerCapacityW and SetPointC describe an air-conditioned cabinet
	// (or one with an air-to-air heat exchanger rated the same way).
	CoolerCapacityW float64 `json:"cooler_capacity_w"`
	SetPointC       float64 `json:"set_point_c"`
	// Sun is the cabinet's direct sun exposure (none indoors).
	Sun Sun `json:"sun"`
	// Paint sets the absorptance unless Absorptance is above 0; an empty
	// paint is read as mid grey.
	Paint       Paint   `json:"paint"`
	Absorptance float64 `json:"absorptance_fraction"`
	// SunlitAreaM2 overrides the sunlit area derived from the dimensions.
	SunlitAreaM2 float64 `json:"sunlit_area_m2"`
	// OtherLossesW is heat from other equipment in the cabinet.
	OtherLossesW float64 `json:"other_losses_w"`
}

// K returns the cabinet's wall heat transfer coefficient in W/m²K: the
// override when set, else HeatTransferCoefficient of its material.
func (c Cabinet) K() float64 {
	if c.HeatTransferWM2K > 0 {
		return c.HeatTransferWM2K
	}
	return HeatTransferCoefficient(c.Material)
}

// EffectiveArea returns the effective cooling surface A_eff in m²: the
// registered EffectiveAreaM2 when above 0, otherwise
//
//	A_eff = Σ b_i × A_i
//
// over top (W×D), front and rear (W×H each) and both sides (D×H each), with
// b = 1.4 exposed top, 0.7 covered top, 0.9 exposed side, 0.5 covered side
// and the floor not counted (IEC TR 60890 surface factors, from memory).
// Valid for a rectangular cabinet; an error when neither an area nor all
// three dimensions are given.
func (c Cabinet) EffectiveArea() (float64, error) {
	if c.EffectiveAreaM2 > 0 {
		return c.EffectiveAreaM2, nil
	}
	h, w, d := c.HeightM, c.WidthM, c.DepthM
	if !(h > 0 && w > 0 && d > 0) {
		return 0, fmt.Errorf("cabinet effective area: need height, width and depth above 0 or an effective area (got %v × %v × %v m)", h, w, d)
	}
	placement := c.Placement
	if placement == "" {
		placement = PlacementFreeStanding
	}
	if !placement.Valid() {
		return 0, fmt.Errorf("cabinet effective area: placement %q is not one of %v", c.Placement, CabinetPlacements())
	}
	const exposedTop, coveredTop, exposedSide, coveredSide = 1.4, 0.7, 0.9, 0.5
	top := exposedTop
	if c.TopCovered {
		top = coveredTop
	}
	sides, rear := placement.covered()
	rearB := exposedSide
	if rear {
		rearB = coveredSide
	}
	a := top*w*d + exposedSide*w*h + rearB*w*h
	a += float64(sides)*coveredSide*d*h + float64(2-sides)*exposedSide*d*h
	return a, nil
}

// absorptance returns the cabinet's solar absorptance.
func (c Cabinet) absorptance() float64 {
	if c.Absorptance > 0 {
		return c.Absorptance
	}
	if c.Paint == "" {
		return PaintMidGrey.Absorptance() // unknown finish: a middling guess
	}
	return c.Paint.Absorptance()
}

// SolarGainW returns the heat the sun puts into the cabinet at a share
// sunFraction of the design irradiance:
//
//	P_sun = α × G × A_sunlit × sunFraction
//
// G the design irradiance (default 1000 W/m²), α the absorptance (Paint or
// Absorptance; 0.2-0.3 fresh white to 0.9 black, DESIGN.md section 3) and
// A_sunlit the top plus the larger vertical face in full sun, half that in
// partial sun, nothing without sun (kelvard's simplification: the sun lights
// at most the top and one side at a time). All absorbed sun is counted as
// heat inside the cabinet, which errs on the warm side. Valid for outdoor
// cabinets; an error when the sunlit area cannot be derived.
func (c Cabinet) SolarGainW(designIrradianceWM2, sunFraction float64) (float64, error) {
	if c.Sun == SunNone || c.Sun == "" {
		return 0, nil
	}
	if !c.Sun.Valid() {
		return 0, fmt.Errorf("cabinet solar gain: sun exposure %q is not one of %v", c.Sun, Suns())
	}
	a := c.SunlitAreaM2
	if !(a > 0) {
		if !(c.HeightM > 0 && c.WidthM > 0 && c.DepthM > 0) {
			return 0, errors.New("cabinet solar gain: the cabinet is in the sun but has neither dimensions nor a sunlit area")
		}
		a = c.WidthM*c.DepthM + c.HeightM*math.Max(c.WidthM, c.DepthM)
		if c.Sun == SunPartial {
			a /= 2
		}
	}
	alpha := c.absorptance()
	if !(alpha > 0 && alpha <= 1) {
		return 0, fmt.Errorf("cabinet solar gain: absorptance %v (paint %q) must lie in (0, 1]", alpha, c.Paint)
	}
	return alpha * designIrradianceWM2 * a * math.Max(0, sunFraction), nil
}

// LossModel splits a drive's rated losses into a fixed part, a part
// proportional to output current and a part proportional to its square.
type LossModel struct {
	Fixed     float64 `json:"fixed_fraction"`
	Linear    float64 `json:"linear_fraction"`
	Quadratic float64 `json:"quadratic_fraction"`
}

// DefaultLossModel returns 0.15 fixed (control electronics, fans, auxiliary
// supply), 0.50 proportional to current (switching losses and the forward
// drops of diodes and transistors) and 0.35 proportional to current squared
// (resistive conduction, chokes, busbars): from memory, common practice in
// shape; the three sum to 1 so the rated point gives the rated losses.
func DefaultLossModel() LossModel { return LossModel{Fixed: 0.15, Linear: 0.50, Quadratic: 0.35} }

// DriveLossesW returns the drive's losses at output current currentA:
//
//	P = P_rated × (a + b·x + c·x²),   x = I / I_rated
//
// with P_rated = Ratings.RatedLossesW(duty) (about 2-3 % of rated power,
// common practice) and (a, b, c) from the loss model (DefaultLossModel,
// from memory). A stopped drive (x = 0) still loses the fixed part. Valid
// for 0 <= x up to the short-time overload; negative currents are read as
// their magnitude; NaN gives NaN.
func DriveLossesW(r Ratings, duty Duty, m LossModel, currentA float64) float64 {
	dr := r.Rated(duty)
	if !(dr.RatedA > 0) {
		return math.NaN()
	}
	x := math.Abs(currentA) / dr.RatedA
	return r.LossFraction * dr.RatedKW * 1000 * (m.Fixed + m.Linear*x + m.Quadratic*x*x)
}

// CabinetParams are the physical constants and defaults of the cabinet model.
type CabinetParams struct {
	// AirHeatJM3K is rho·cp of the cooling air, J/(m³·K).
	AirHeatJM3K float64 `json:"air_heat_j_per_m3k"`
	// DesignIrradianceWM2 is the sun on a sunlit surface at design conditions.
	DesignIrradianceWM2 float64 `json:"design_irradiance_w_per_m2"`
	// SampleSunFraction is the share of design irradiance assumed for every
	// sample by the per-sample estimate (the readings do not say whether the
	// sun was out).
	SampleSunFraction float64 `json:"sample_sun_fraction"`
	// Losses splits the drive's losses by load.
	Losses LossModel `json:"losses"`
}

// DefaultCabinetParams returns rho·cp = 1200 J/(m³·K) (air near sea level at
// about 20 °C; physics), 1000 W/m² design irradiance (DESIGN.md section 3),
// a sample sun fraction of 0.3 (from memory: a clear summer day brings about
// 7 kWh/m², some 0.3 of 1000 W/m² averaged over 24 h) and DefaultLossModel.
// At altitude lower AirHeatJM3K with the air density (about 11 % less at
// 1000 m, from memory).
func DefaultCabinetParams() CabinetParams {
	return CabinetParams{AirHeatJM3K: 1200, DesignIrradianceWM2: 1000, SampleSunFraction: 0.3, Losses: DefaultLossModel()}
}

// CabinetHeat is the heat balance of a cabinet at one operating point.
type CabinetHeat struct {
	Cooling         Cooling `json:"cooling"`
	AmbientC        float64 `json:"ambient_c"`
	LossesW         float64 `json:"losses_w"` // drive and other equipment
	SolarW          float64 `json:"solar_w"`
	AreaM2          float64 `json:"effective_area_m2"`
	KWM2K           float64 `json:"heat_transfer_w_per_m2k"`
	RiseK           float64 `json:"rise_k"`
	InternalAirC    float64 `json:"internal_air_c"`
	CoolerLoadW     float64 `json:"cooler_load_w"` // air-conditioned only
	CoolerCapacityW float64 `json:"cooler_capacity_w"`
	OverCapacity    bool    `json:"over_capacity"`
}

// CabinetAir returns the internal air temperature of the cabinet from the
// outside air ambientC, the heat lossesW released inside (drive and other
// equipment: pass both) and the sun at sunFraction of design irradiance:
//
//   - sealed: T_in = T_amb + (P + P_sun) / (k × A_eff) (enclosure design
//     notes; k per HeatTransferCoefficient, A_eff per EffectiveArea);
//   - fan-ventilated: T_in = T_amb + (P + P_sun) / (rho·cp × V), V the air
//     flow in m³/s (physics). This is the exhaust (top) air, the warmest in
//     the cabinet; heat shed through the walls is ignored, which errs warm;
//   - air-conditioned: the cooler's load is Q = P + P_sun + k·A_eff·(T_amb -
//     T_set). With Q <= capacity the air holds the set point (or sits below
//     it, at the sealed value, when the cooler is idle); beyond capacity the
//     excess heats like a sealed cabinet: T_in = T_set + (Q - C) / (k·A_eff),
//     which equals T_amb + (P + P_sun - C) / (k·A_eff) (cooler rating).
//
// Valid for still outside air and a well-mixed inside; IEC TR 60890 gives a
// hotter top-of-cabinet air than this mean (from memory).
func CabinetAir(c Cabinet, ambientC, lossesW, sunFraction float64, p CabinetParams) (CabinetHeat, error) {
	if math.IsNaN(ambientC) || math.IsNaN(lossesW) {
		return CabinetHeat{}, fmt.Errorf("cabinet air: ambient %v °C and losses %v W must be numbers", ambientC, lossesW)
	}
	sun, err := c.SolarGainW(p.DesignIrradianceWM2, sunFraction)
	if err != nil {
		return CabinetHeat{}, fmt.Errorf("cabinet air: %w", err)
	}
	h := CabinetHeat{Cooling: c.Cooling, AmbientC: ambientC, LossesW: lossesW, SolarW: sun}
	load := lossesW + sun
	wall := func() (float64, error) {
		a, err := c.EffectiveArea()
		if err != nil {
			return 0, err
		}
		k := c.K()
		if !(k > 0) {
			return 0, fmt.Errorf("material %q has no heat transfer coefficient and none is set", c.Material)
		}
		h.AreaM2, h.KWM2K = a, k
		return k * a, nil
	}
	switch c.Cooling {
	case CoolingSealed, "":
		h.Cooling = CoolingSealed
		kA, err := wall()
		if err != nil {
			return CabinetHeat{}, fmt.Errorf("cabinet air (sealed): %w", err)
		}
		h.RiseK = load / kA
	case CoolingFanVentilated:
		v := c.AirflowM3H / 3600
		if !(v > 0) || !(p.AirHeatJM3K > 0) {
			return CabinetHeat{}, fmt.Errorf("cabinet air (fan-ventilated): air flow %v m³/h and rho·cp %v must be above 0", c.AirflowM3H, p.AirHeatJM3K)
		}
		h.RiseK = load / (p.AirHeatJM3K * v)
	case CoolingAirConditioned:
		kA, err := wall()
		if err != nil {
			return CabinetHeat{}, fmt.Errorf("cabinet air (air-conditioned): %w", err)
		}
		if !(c.CoolerCapacityW > 0) || math.IsNaN(c.SetPointC) {
			return CabinetHeat{}, fmt.Errorf("cabinet air (air-conditioned): cooler capacity %v W must be above 0 and a set point given", c.CoolerCapacityW)
		}
		h.CoolerCapacityW = c.CoolerCapacityW
		idle := ambientC + load/kA
		switch q := load + kA*(ambientC-c.SetPointC); {
		case idle <= c.SetPointC:
			h.CoolerLoadW = 0
			h.RiseK = load / kA
		case q <= c.CoolerCapacityW:
			h.CoolerLoadW = q
			h.RiseK = c.SetPointC - ambientC
		default:
			h.CoolerLoadW = q
			h.OverCapacity = true
			h.RiseK = (load - c.CoolerCapacityW) / kA
		}
	default:
		return CabinetHeat{}, fmt.Errorf("cabinet air: cooling %q is not one of %v", c.Cooling, Coolings())
	}
	h.InternalAirC = ambientC + h.RiseK
	return h, nil
}

// CabinetModel estimates the air inside a cabinet sample by sample, for the
// life models when a drive logs no internal air temperature. Build it with
// NewCabinetModel; it is a value and safe for concurrent use.
type CabinetModel struct {
	cabinet Cabinet
	ratings Ratings
	duty    Duty
	params  CabinetParams
}

// NewCabinetModel checks the cabinet once (so the per-sample estimate cannot
// fail on it) and returns the model.
func NewCabinetModel(c Cabinet, r Ratings, duty Duty, p CabinetParams) (CabinetModel, error) {
	if _, err := CabinetAir(c, 20, r.RatedLossesW(duty), p.SampleSunFraction, p); err != nil {
		return CabinetModel{}, fmt.Errorf("cabinet model: %w", err)
	}
	if !(r.Rated(duty).RatedA > 0) {
		return CabinetModel{}, errors.New("cabinet model: the drive model has no rated current")
	}
	return CabinetModel{cabinet: c, ratings: r, duty: duty, params: p}, nil
}

// EstimateInternalAirC returns the cabinet air for one sample: CabinetAir
// at the sample's ambient, with the drive's losses at the sample's current
// (DriveLossesW; a stopped drive counts its fixed losses) plus the
// cabinet's other losses, and the sun at CabinetParams.SampleSunFraction.
// NaN when the sample's ambient or current is not logged. Formula, source
// and validity as CabinetAir and DriveLossesW.
func (m CabinetModel) EstimateInternalAirC(s Sample) float64 {
	if math.IsNaN(s.AmbientC) || math.IsNaN(s.CurrentA) {
		return math.NaN()
	}
	current := s.CurrentA
	if !s.Running() {
		current = 0
	}
	loss := DriveLossesW(m.ratings, m.duty, m.params.Losses, current) + m.cabinet.OtherLossesW
	h, err := CabinetAir(m.cabinet, s.AmbientC, loss, m.params.SampleSunFraction, m.params)
	if err != nil {
		return math.NaN()
	}
	return h.InternalAirC
}

// AirAtDriveC returns the sample's logged internal air when it has one and
// EstimateInternalAirC otherwise.
func (m CabinetModel) AirAtDriveC(s Sample) float64 {
	if !math.IsNaN(s.InternalAirC) {
		return s.InternalAirC
	}
	return m.EstimateInternalAirC(s)
}

// CabinetInput is what AssessCabinet judges: a cabinet at its design point.
type CabinetInput struct {
	Cabinet Cabinet
	Ratings Ratings
	Duty    Duty
	// DesignAmbientMaxC is the area's design maximum ambient.
	DesignAmbientMaxC float64
	// DesignCurrentA is the load at the design point, for example the
	// 95th-percentile running current; NaN or 0 for the rated current.
	DesignCurrentA float64
}

// CabinetAssessment is the result of AssessCabinet.
type CabinetAssessment struct {
	Heat     CabinetHeat `json:"heat"`
	Findings []Finding   `json:"findings"`
}

// AssessCabinet predicts the cabinet air at the design point (design maximum
// ambient, full design sun, drive losses at DesignCurrentA plus other
// losses) with CabinetAir and raises:
//
//   - environment.cabinet_cooling_capacity (major): an air-conditioned
//     cabinet whose heat load exceeds the cooler's rated capacity;
//   - environment.cabinet_air_above_rating: predicted internal air above
//     the drive's rated ambient (major), or above its maximum ambient
//     (critical).
//
// Formula, sources and validity as CabinetAir.
func AssessCabinet(in CabinetInput, p CabinetParams) (CabinetAssessment, error) {
	if math.IsNaN(in.DesignAmbientMaxC) {
		return CabinetAssessment{}, errors.New("assess cabinet: the design maximum ambient is required")
	}
	current := in.DesignCurrentA
	if math.IsNaN(current) || current <= 0 {
		current = in.Ratings.Rated(in.Duty).RatedA
	}
	loss := DriveLossesW(in.Ratings, in.Duty, p.Losses, current)
	if math.IsNaN(loss) {
		return CabinetAssessment{}, errors.New("assess cabinet: the drive model has no rated current")
	}
	h, err := CabinetAir(in.Cabinet, in.DesignAmbientMaxC, loss+in.Cabinet.OtherLossesW, 1, p)
	if err != nil {
		return CabinetAssessment{}, fmt.Errorf("assess cabinet: %w", err)
	}
	out := CabinetAssessment{Heat: h}
	balance := []Evidence{
		{Name: "design maximum ambient", Value: in.DesignAmbientMaxC, Unit: "°C"},
		{Name: "heat from drive and other equipment", Value: h.LossesW, Unit: "W", Source: dutySrcLossModel + "; " + dutySrcLosses},
		{Name: "solar gain at design irradiance", Value: h.SolarW, Unit: "W", Source: dutySrcSolar},
	}
	src := dutySrcSealedCabinet
	switch h.Cooling {
	case CoolingSealed, CoolingAirConditioned:
		balance = append(balance,
			Evidence{Name: "effective cooling surface", Value: h.AreaM2, Unit: "m²", Source: dutySrcSurfaceFactor},
			Evidence{Name: "wall heat transfer coefficient", Value: h.KWM2K, Unit: "W/m²K", Source: dutySrcSealedCabinet})
	case CoolingFanVentilated:
		src = dutySrcVentilated
		balance = append(balance, Evidence{Name: "fan air flow", Value: in.Cabinet.AirflowM3H, Unit: "m³/h", Source: dutySrcVentilated})
	}
	if h.OverCapacity {
		out.Findings = append(out.Findings, drFinding(cabinetRules, "environment.cabinet_cooling_capacity", SeverityMajor,
			fmt.Sprintf("At the design maximum of %.1f °C the cabinet's heat load of %.0f W exceeds its cooler's rated %.0f W; the air inside rises to %.1f °C instead of the %.1f °C set point.",
				in.DesignAmbientMaxC, h.CoolerLoadW, h.CoolerCapacityW, h.InternalAirC, in.Cabinet.SetPointC),
			append([]Evidence{{Name: "cooler heat load", Value: h.CoolerLoadW, Unit: "W", Limit: h.CoolerCapacityW, Source: dutySrcCooler}}, balance...), true))
	}
	r := in.Ratings
	if h.InternalAirC > r.RatedAmbientC {
		sev, limit := SeverityMajor, r.RatedAmbientC
		what := "rated ambient"
		if h.InternalAirC > r.MaxAmbientC {
			sev, limit, what = SeverityCritical, r.MaxAmbientC, "maximum ambient"
		}
		fac, _ := AmbientFactor(r, h.InternalAirC)
		out.Findings = append(out.Findings, drFinding(cabinetRules, "environment.cabinet_air_above_rating", sev,
			fmt.Sprintf("At the design maximum of %.1f °C the air inside the cabinet is predicted at %.1f °C (%.1f K rise), above the drive's %s of %.1f °C; the ambient derate factor there is %.2f.",
				in.DesignAmbientMaxC, h.InternalAirC, h.RiseK, what, limit, fac.Value),
			append([]Evidence{
				{Name: "predicted internal air", Value: h.InternalAirC, Unit: "°C", Limit: limit, Source: src},
				{Name: "drive rated ambient", Value: r.RatedAmbientC, Unit: "°C"},
				{Name: "drive maximum ambient", Value: r.MaxAmbientC, Unit: "°C"},
				{Name: "ambient derate factor at that air", Value: fac.Value, Unit: "fraction", Source: dutySrcAmbientDerate},
			}, balance...), true))
	}
	return out, nil
}

// cabinetRules lists the rules this file raises.
var cabinetRules = []RuleInfo{
	{ID: "environment.cabinet_cooling_capacity", Kind: KindEnvironment, Title: "Cabinet cooler too small for the heat load",
		Remedy: "Fit a cooler of larger rated capacity, shade the cabinet or paint it white, or move heat-producing equipment out of the cabinet."},
	{ID: "environment.cabinet_air_above_rating", Kind: KindEnvironment, Title: "Cabinet air above the drive's rated ambient",
		Remedy: "Add or enlarge ventilation or cooling, shade the cabinet from the sun or repaint it a light colour, mount the drive's heatsink through the cabinet wall, or derate or resize the drive for the air it sits in."},
}
