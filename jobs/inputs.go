package jobs

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"

	"kelvard/health"
	"kelvard/store"
)

// This file turns register rows into the models' inputs. It is the one
// place that knows how store fields map to health parameters.

// ratingsOf maps a drive model to the derating inputs.
func ratingsOf(m store.DriveModel) health.Ratings {
	r := health.DefaultRatings(m.VoltageClassV)
	r.SupplyPhases = m.SupplyPhases
	r.NormalDutyA, r.HeavyDutyA = m.NormalDutyCurrentA, m.HeavyDutyCurrentA
	r.NormalDutyKW, r.HeavyDutyKW = m.NormalDutyPowerKW, m.HeavyDutyPowerKW
	r.NormalOverload.Fraction, r.NormalOverload.DurationS = m.NormalOverload, m.OverloadS
	r.HeavyOverload.Fraction, r.HeavyOverload.DurationS = m.HeavyOverload, m.OverloadS
	r.RatedAmbientC, r.AmbientSlopePerC, r.MaxAmbientC = m.RatedAmbientC, m.AmbientDeratePerC, m.MaxAmbientC
	r.AltitudeRatingM, r.AltitudeSlopePer100M, r.MaxAltitudeM = m.AltitudeRatingM, m.AltitudeDeratePer100, m.MaxAltitudeM
	r.DefaultCarrierKHz = m.DefaultCarrierKHz
	r.CarrierTable = make([]health.CarrierPoint, len(m.CarrierDerate))
	for i, p := range m.CarrierDerate {
		r.CarrierTable[i] = health.CarrierPoint{KHz: p.CarrierKHz, Factor: p.Fraction}
	}
	r.SinglePhaseFactor, r.LossFraction, r.BusTripV = m.SinglePhaseFraction, m.LossesFraction, m.BusTripV
	return r
}

// capacitorSpecOf maps the model's capacitor rating; rated ripple is taken
// at the normal-duty rated current (the current the rating is given for).
func capacitorSpecOf(m store.DriveModel) health.CapacitorSpec {
	s := health.DefaultCapacitorSpec()
	s.RatedLifeH, s.RatedTempC = m.Capacitor.RatedLifeH, m.Capacitor.RatedTempC
	s.RatingIncludesRipple, s.RippleRiseC = m.Capacitor.RatingIncludesRipple, m.Capacitor.RippleRiseC
	s.ActivationEnergyEV = m.Capacitor.ActivationEnergyEV
	s.RippleRefCurrentA = m.NormalDutyCurrentA
	return s
}

func fanSpecOf(m store.DriveModel) health.FanSpec {
	s := health.DefaultFanSpec()
	s.L10H, s.RefTempC, s.HalvingC, s.Runs = m.Fan.L10H, m.Fan.RefTempC, m.Fan.HalvingInterval, m.Fan.Runs
	return s
}

// cabinetOf maps a position's cabinet; nil for a drive in its own
// enclosure.
func cabinetOf(p store.Position, env health.Environment) *health.Cabinet {
	if p.Mounting != health.MountingCabinet {
		return nil
	}
	c := p.Cabinet
	sun := env.Sun
	if env.Location == health.Indoor {
		sun = health.SunNone
	}
	return &health.Cabinet{
		Cooling: c.Cooling, Material: c.Material, HeightM: c.HeightM, WidthM: c.WidthM, DepthM: c.DepthM,
		Placement: c.Placement, TopCovered: c.TopCovered, EffectiveAreaM2: c.SurfaceAreaM2, AirflowM3H: c.AirflowM3PerH,
		CoolerCapacityW: c.CoolingCapacityW, SetPointC: c.SetPointC, Sun: sun, Absorptance: c.AbsorptanceFraction,
		OtherLossesW: c.OtherLossesW,
	}
}

// positionSetup is what the models need from one position a drive stood
// at: the assessment inputs, the air fill temperature for unobserved time
// and the per-reading cabinet air estimate.
type positionSetup struct {
	input   health.PositionInput
	fillC   float64
	cabinet *health.CabinetModel
}

// setupPosition prepares a position for the models.
func setupPosition(pc store.PositionContext, m store.DriveModel, r health.Ratings, params health.DriveParams) (positionSetup, error) {
	env := pc.Area.Environment.Health()
	pos := pc.Position
	enc, err := m.Enclosure.Parse()
	if pos.Mounting == health.MountingCabinet {
		enc, err = health.ParseEnclosure(pos.Cabinet.NEMAType, pos.Cabinet.IPCode)
	}
	if err != nil {
		return positionSetup{}, fmt.Errorf("position %s enclosure: %w", pos.Tag, err)
	}
	in := health.PositionInput{
		Criticality: pos.Criticality,
		Environment: env,
		Housing:     health.Housing{Enclosure: enc, Mounting: pos.Mounting, BoardsCoated: m.ConformalCoating},
		Cabinet:     cabinetOf(pos, env),
		Application: health.Application{Duty: pos.Duty, AltitudeM: pc.Site.ElevationM, CarrierKHz: pos.CarrierKHz,
			SupplyPhases: pos.SupplyPhases},
		SupplyLineV: pos.SupplyVoltageV,
	}
	if pos.SinglePhaseDerateSet {
		in.Application.SinglePhaseFactor = m.SinglePhaseFraction
	}
	ps := positionSetup{input: in, fillC: env.AmbientMaxC}
	if in.Cabinet != nil {
		cm, err := health.NewCabinetModel(*in.Cabinet, r, pos.Duty, params.Cabinet)
		if err != nil {
			return positionSetup{}, fmt.Errorf("position %s cabinet: %w", pos.Tag, err)
		}
		ps.cabinet = &cm
		// Unobserved time inside a cabinet is filled with the cabinet air
		// at the design point, the conservative choice.
		design, err := health.AssessCabinet(health.CabinetInput{Cabinet: *in.Cabinet, Ratings: r, Duty: pos.Duty,
			DesignAmbientMaxC: env.AmbientMaxC}, params.Cabinet)
		if err != nil {
			return positionSetup{}, fmt.Errorf("position %s cabinet air: %w", pos.Tag, err)
		}
		ps.fillC = design.Heat.InternalAirC
	}
	return ps, nil
}

// storageTempC is the temperature a stored drive's capacitors age at: the
// stores area's design maximum, else the site's (conservative).
func storageTempC(c *store.AssessContext) float64 {
	if c.StoresArea != nil {
		return c.StoresArea.Environment.AmbientMaxC
	}
	if !math.IsNaN(c.Site.AmbientMaxC) && c.Site.AmbientMaxC != 0 {
		return c.Site.AmbientMaxC
	}
	return 30
}

// paramsHash fingerprints everything the life ledgers depend on, so a
// change in the register or the parameters forces a full recompute.
func paramsHash(parts ...any) string {
	h := sha256.New()
	for _, p := range parts {
		if err := store.SafeJSONTo(h, p); err != nil {
			fmt.Fprintf(h, "%v", p)
		}
		h.Write([]byte{'\n'})
	}
	return hex.EncodeToString(h.Sum(nil)[:16])
}
