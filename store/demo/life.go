package demo

import (
	"math"

	"kelvard/store"
)

// This file holds the life arithmetic the generator uses to age the
// fleet's capacitor banks and fans while it writes their history, and to
// fill the life-used fractions that some drives report. kelvard's own
// models live in package health; these few lines are the same published
// rules, written out so the generator can size the planted capacitor case
// by hand (see plantKioskCapacitors).

// capacitorCoreC is the capacitor core temperature
//
//	core = air + dT_rated × (I / I_rated)²
//
// air the air around the bank (inside the drive or its cabinet), I the
// output current as the proxy for ripple current (common practice) and
// dT_rated the core rise at rated ripple (about 5 °C for ordinary 105 °C
// parts: capacitor makers' life formulas; DESIGN.md section 3).
func capacitorCoreC(spec store.CapacitorSpec, airC, loadFraction float64) float64 {
	return airC + spec.RippleRiseC*loadFraction*loadFraction
}

// capacitorRefC is the reference core temperature Tref: T0 + dT_rated when
// the rating includes rated ripple, T0 otherwise (capacitor makers' life
// formulas).
func capacitorRefC(spec store.CapacitorSpec) float64 {
	if spec.RatingIncludesRipple {
		return spec.RatedTempC + spec.RippleRiseC
	}
	return spec.RatedTempC
}

// capacitorLifeH is the 10-degree rule
//
//	L = L0 × 2^((Tref − Tcore) / 10)
//
// (capacitor makers' application notes; DESIGN.md section 3). At the
// reference core temperature it gives exactly L0.
func capacitorLifeH(spec store.CapacitorSpec, coreC float64) float64 {
	return spec.RatedLifeH * math.Exp2((capacitorRefC(spec)-coreC)/10)
}

// fanLifeH is the fan's L10 life at air temperature airC, halving for every
// HalvingInterval kelvin above the reference temperature (common practice;
// DESIGN.md section 3):
//
//	L = L10 × 2^((Tref − T) / interval)
func fanLifeH(spec store.FanSpec, airC float64) float64 {
	return spec.L10H * math.Exp2((spec.RefTempC-airC)/spec.HalvingInterval)
}
