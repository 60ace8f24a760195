package demo

import (
	"kelvard/health"
	"kelvard/store"
)

// This file turns register rows into the health models' inputs, the way
// the assessment is expected to: the generator uses it to size the planted
// problems and ExpectedFindings to list what the models raise.

// ratingsOf returns a drive model's ratings as the health models take them.
func ratingsOf(m store.DriveModel) health.Ratings {
	table := make([]health.CarrierPoint, len(m.CarrierDerate))
	for i, p := range m.CarrierDerate {
		table[i] = health.CarrierPoint{KHz: p.CarrierKHz, Factor: p.Fraction}
	}
	return health.Ratings{
		VoltageClassV: m.VoltageClassV, SupplyPhases: m.SupplyPhases,
		NormalDutyA: m.NormalDutyCurrentA, HeavyDutyA: m.HeavyDutyCurrentA,
		NormalDutyKW: m.NormalDutyPowerKW, HeavyDutyKW: m.HeavyDutyPowerKW,
		NormalOverload:   health.OverloadAllowance{Fraction: m.NormalOverload, DurationS: m.OverloadS, EveryS: 600},
		HeavyOverload:    health.OverloadAllowance{Fraction: m.HeavyOverload, DurationS: m.OverloadS, EveryS: 600},
		RatedAmbientC:    m.RatedAmbientC,
		AmbientSlopePerC: m.AmbientDeratePerC, MaxAmbientC: m.MaxAmbientC,
		AltitudeRatingM: m.AltitudeRatingM, AltitudeSlopePer100M: m.AltitudeDeratePer100, MaxAltitudeM: m.MaxAltitudeM,
		DefaultCarrierKHz: m.DefaultCarrierKHz, CarrierTable: table,
		SinglePhaseFactor: m.SinglePhaseFraction, LossFraction: m.LossesFraction, BusTripV: m.BusTripV,
	}
}

// cabinetOf returns a position's cabinet as the heat-balance model takes
// it; the sun on the cabinet is the area's.
func cabinetOf(c store.Cabinet, sun health.Sun) health.Cabinet {
	if sun == "" {
		sun = health.SunNone
	}
	return health.Cabinet{
		Cooling: c.Cooling, Material: c.Material,
		HeightM: c.HeightM, WidthM: c.WidthM, DepthM: c.DepthM,
		Placement: c.Placement, TopCovered: c.TopCovered, EffectiveAreaM2: c.SurfaceAreaM2,
		AirflowM3H: c.AirflowM3PerH, CoolerCapacityW: c.CoolingCapacityW, SetPointC: c.SetPointC,
		Sun: sun, Absorptance: c.AbsorptanceFraction, OtherLossesW: c.OtherLossesW,
	}
}

// housingOf returns what stands between a drive and the area's air: the
// drive model's own enclosure, or the position's cabinet, with the model's
// board coating.
func housingOf(pos store.Position, m store.DriveModel) (health.Housing, error) {
	spec := m.Enclosure
	if pos.Mounting == health.MountingCabinet {
		spec = store.EnclosureSpec{NEMAType: pos.Cabinet.NEMAType, IPCode: pos.Cabinet.IPCode}
	}
	e, err := spec.Parse()
	if err != nil {
		return health.Housing{}, err
	}
	return health.Housing{Enclosure: e, Mounting: pos.Mounting, BoardsCoated: m.ConformalCoating}, nil
}

// singlePhaseFactorOf is the derate the position sets for a single-phase
// supply: the model's factor when the position says it is set, else none.
func singlePhaseFactorOf(pos store.Position, m store.DriveModel) float64 {
	if pos.SupplyPhases == 1 && pos.SinglePhaseDerateSet {
		return m.SinglePhaseFraction
	}
	return 0
}
