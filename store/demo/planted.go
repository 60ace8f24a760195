package demo

import (
	"fmt"
	"time"
)

// This file names the planted problems and sizes the one that needs
// arithmetic: the booster kiosk whose capacitors reach end of life within
// a year.

// tag builds a position tag such as "INT-P01".
func tag(prefix, kind string, n int) string { return fmt.Sprintf(tagFormat, prefix, kind, n) }

// plantedPositions returns the planted problems on positions, in the order
// of DESIGN.md section 6.
func plantedPositions() []Planted {
	return []Planted{
		{tag(tagIntake, tagKindPump, 1), "enclosure.outdoor", "indoor-only NEMA Type 1 drive outdoors at the intake"},
		{tag(tagDewater, tagKindMix, 1), "enclosure.water", "open-chassis IP20 drive loose in the hose-down hall"},
		{tag(tagDosing, tagKindPump, 2), "environment.board_corrosion", "uncoated boards in the G3 dosing room"},
		{tag(tagIntake, tagKindScr, 1), "environment.cabinet_air_above_rating", "sealed sunlit cabinet whose air runs above the drive's rated ambient"},
		{tag(tagLift, tagKindPump, 9), "derating.single_phase_supply", "three-phase drive fed single-phase without its derate"},
		{tag(tagFilters, tagKindBlow, 3), "derating.carrier", "carrier raised to 10 kHz over the derated current"},
		{tag(tagBlowers, tagKindBlow, 2), "dc_bus.ripple_rising", "bus ripple climbing at the same load over the last 160 days"},
		{tag(tagDewater, tagKindCent, 2), "dc_bus.overvoltage_on_deceleration", "centrifuge tripping on bus over-voltage while decelerating"},
		{tag(tagBoosters, tagKindPump, 3), "capacitor.end_of_life_near", "kiosk capacitor bank reaching end of life within a year"},
		{tag(tagLift, tagKindPump, 12), "data_quality.silent", "readings stop nine days before the end of the reading year"},
	}
}

// plantedStorage is the planted storage case, on the shelved spare.
func plantedStorage(serial string) Planted {
	return Planted{"drive:" + serial, "storage.reform_required", "spare unpowered in the stores for more than two years"}
}

// markPlanted flags the positions that carry a planted problem.
func markPlanted(plans []*posPlan) {
	for _, pl := range plantedPositions() {
		for _, p := range plans {
			if p.row.Tag == pl.Subject {
				p.isPlanted = true
			}
		}
	}
}

// kioskLifeUsedTarget is the capacitor life used the hot kiosk's bank
// reaches at Now.
const kioskLifeUsedTarget = 0.94

// plantKioskInstall returns when the hot kiosk's unit, with its original
// capacitor bank, was installed, so that the bank's life used reaches
// kioskLifeUsedTarget at Now at the profile's damage rate.
//
// The arithmetic, by hand, with the 10-degree rule (capacitor makers'
// application notes; DESIGN.md section 3). The bank is a 5000 h part rated
// at 105 °C with rated ripple and 5 °C core rise, so Tref = 105 + 5 =
// 110 °C. The kiosk air averages about 37 °C (site mean 21 °C, 15 K of
// trapped drive losses and about 1 K of sun on the steel). The booster runs
// near full speed at about 0.70 of rated current, so the air inside the
// compact sealed drive sits 8 + 34 × 0.70² ≈ 24.7 K above the kiosk air,
// about 62 °C, and the capacitor core 5 × 0.70² ≈ 2.5 K above that, about
// 64 °C:
//
//	L = 5000 × 2^((110 − 64) / 10) = 5000 × 2^4.6 ≈ 121 000 h at the mean.
//
// 2^(T/10) is convex, so the yearly and daily swings (about ±6 K and ±4 K
// in the kiosk, more inside the drive) raise the mean damage rate by about
// a tenth: the bank uses about 8760 / 110 000 ≈ 0.080 of its life a year.
// Installed 0.94 / 0.080 ≈ 11.7 years before Now, it has used about 0.94,
// and at the trailing year's rate the remaining 0.06 lasts about
// 0.06 / 0.080 ≈ 0.75 year, some 275 days: inside the 365-day horizon,
// outside the 90-day one. The assessment sees only the reading year and
// charges the years before it at that year's rate, so the planted unit
// runs exactly as the profile (no unit-to-unit spread). The generator takes the rate from the position's
// profile (the same year the readings carry) rather than these rounded
// figures; the generated year gives life used 0.938 and 285 days, checked
// from the readings by TestPlantedKioskCapacitors.
func plantKioskInstall(now time.Time, pr profile) time.Time {
	h := kioskLifeUsedTarget / pr.capPerH
	return addHours(now, -h)
}
