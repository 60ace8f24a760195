package demo

import (
	"fmt"

	"kelvard/health"
	"kelvard/store"
)

// This file lays out the fleet: the drive models, the sites with their
// climate, the areas with their environment, and the positions with the
// duty each one carries. Everything here is fixed; the random parts (ages,
// failures, weather, loads) come from the seed in the other files.

// modelSpec is a drive model's register row plus what the generator needs
// to make its readings and parts.
type modelSpec struct {
	row    store.DriveModel
	prefix string // serial prefix
	size   string // size in part numbers: "11", "45"
	// airA + airB·x² is the rise of the air inside the drive over the air
	// around it while running at load x (a share of the normal-duty rated
	// current); airA·stoppedShare when stopped.
	airA, airB float64
	// hsA + hsB·x^1.5 is the heatsink rise over the air around it.
	hsA, hsB float64
	// rippleV is the DC-bus ripple, peak to peak, at full load on a
	// balanced three-phase supply.
	rippleV float64
	// What the drive logs.
	logsInternal, logsRipple, logsPeak, logsLife, logsBank bool
	// The capacitor bank as fitted new.
	bankUF, bankESR float64
}

func carrierTable() []store.CarrierPoint {
	// The default table of health.DefaultRatings (from memory: a typical
	// shape of makers' tables), written out as the register stores it.
	return []store.CarrierPoint{{CarrierKHz: 6, Fraction: 0.90}, {CarrierKHz: 8, Fraction: 0.80},
		{CarrierKHz: 12, Fraction: 0.65}, {CarrierKHz: 16, Fraction: 0.55}}
}

// newModel fills the fields every model shares: a 400 V class three-phase
// drive, 110 % / 150 % overload for 60 s, 1 % per °C and 1 % per 100 m
// derating, DC-bus trip at 810 V (within the 800-830 V the 400/480 V class
// commonly uses, from memory), 5000 h / 105 °C capacitors rated with ripple
// and 5 °C core rise, and a fan of L10 40 000 h at 60 °C halving every
// 10 °C (DESIGN.md section 3 defaults).
func newModel(name, maker string, ndA, ndKW, hdA, hdKW float64) store.DriveModel {
	return store.DriveModel{
		Name: name, Maker: maker, VoltageClassV: 400, SupplyPhases: 3,
		NormalDutyCurrentA: ndA, NormalDutyPowerKW: ndKW, HeavyDutyCurrentA: hdA, HeavyDutyPowerKW: hdKW,
		NormalOverload: 1.10, HeavyOverload: 1.50, OverloadS: 60,
		RatedAmbientC: 40, AmbientDeratePerC: 0.01, MaxAmbientC: 50,
		AltitudeRatingM: 1000, AltitudeDeratePer100: 0.01, MaxAltitudeM: 3000,
		DefaultCarrierKHz: 4, CarrierDerate: carrierTable(), SinglePhaseFraction: 0.50,
		LossesFraction: 0.025, BusTripV: 810,
		Capacitor:      store.CapacitorSpec{RatedLifeH: 5000, RatedTempC: 105, RatingIncludesRipple: true, RippleRiseC: 5},
		Fan:            store.FanSpec{L10H: 40000, RefTempC: 60, HalvingInterval: 10, Runs: health.FanAlways},
		LabourCostPerH: 90, LeadTimeDays: 42,
	}
}

// fleetModels returns the eight drive models, two invented makers.
func fleetModels() []*modelSpec {
	kv11 := newModel(modelKV11, makerKV, 23, 11, 18, 7.5)
	kv11.RatedAmbientC, kv11.MaxAmbientC = 45, 55
	kv11.Enclosure = store.EnclosureSpec{NEMAType: "12", IPCode: "IP54"}
	kv11.ConformalCoating = true
	kv11.DriveCost, kv11.CapacitorKitCost, kv11.FanKitCost = 2900, 260, 70
	kv11.DriveLabourH, kv11.CapacitorLabourH, kv11.FanLabourH = 3, 2.5, 0.75
	kv11.Notes = noteModelKV11

	kv11x := newModel(modelKV11X, makerKV, 23, 11, 18, 7.5)
	kv11x.Enclosure = store.EnclosureSpec{NEMAType: "4X", IPCode: "IP66"}
	kv11x.ConformalCoating = true
	kv11x.DriveCost, kv11x.CapacitorKitCost, kv11x.FanKitCost = 4200, 280, 80
	kv11x.DriveLabourH, kv11x.CapacitorLabourH, kv11x.FanLabourH = 3, 2.5, 1
	kv11x.Notes = noteModelKV11X

	kv45 := newModel(modelKV45, makerKV, 86, 45, 72, 37)
	kv45.Enclosure = store.EnclosureSpec{NEMAType: "12", IPCode: "IP54"}
	kv45.ConformalCoating = true
	kv45.DriveCost, kv45.CapacitorKitCost, kv45.FanKitCost = 7800, 690, 180
	kv45.DriveLabourH, kv45.CapacitorLabourH, kv45.FanLabourH = 5, 4, 1.5
	kv45.Notes = noteModelKV45

	kv45x := newModel(modelKV45X, makerKV, 86, 45, 72, 37)
	kv45x.Enclosure = store.EnclosureSpec{NEMAType: "4X", IPCode: "IP66"}
	kv45x.ConformalCoating = true
	kv45x.DriveCost, kv45x.CapacitorKitCost, kv45x.FanKitCost = 10900, 720, 210
	kv45x.DriveLabourH, kv45x.CapacitorLabourH, kv45x.FanLabourH = 5, 4, 1.5
	kv45x.Notes = noteModelKV45X

	kv110 := newModel(modelKV110, makerKV, 205, 110, 170, 90)
	kv110.Enclosure = store.EnclosureSpec{NEMAType: "12", IPCode: "IP54"}
	kv110.ConformalCoating = true
	kv110.LossesFraction = 0.022
	kv110.Fan.Runs = health.FanWhenWarm
	kv110.DriveCost, kv110.CapacitorKitCost, kv110.FanKitCost = 19500, 1650, 420
	kv110.DriveLabourH, kv110.CapacitorLabourH, kv110.FanLabourH = 10, 6, 2
	kv110.LeadTimeDays = 70
	kv110.Notes = noteModelKV110

	tq7 := newModel(modelTQ7, makerTQ, 16, 7.5, 12.5, 5.5)
	tq7.Enclosure = store.EnclosureSpec{IPCode: "IP20"}
	tq7.RatedAmbientC, tq7.MaxAmbientC = 50, 55 // open chassis IP20, as is common
	tq7.LossesFraction, tq7.BusTripV = 0.03, 800
	tq7.Fan.L10H = 30000
	tq7.DriveCost, tq7.CapacitorKitCost, tq7.FanKitCost = 1400, 150, 45
	tq7.DriveLabourH, tq7.CapacitorLabourH, tq7.FanLabourH = 2, 2, 0.5
	tq7.LeadTimeDays = 28
	tq7.Notes = noteModelTQ7

	tq7x := newModel(modelTQ7X, makerTQ, 16, 7.5, 12.5, 5.5)
	tq7x.Enclosure = store.EnclosureSpec{NEMAType: "4X", IPCode: "IP66"}
	tq7x.LossesFraction, tq7x.BusTripV = 0.03, 800
	tq7x.Fan.L10H = 30000
	tq7x.DriveCost, tq7x.CapacitorKitCost, tq7x.FanKitCost = 2300, 150, 45
	tq7x.DriveLabourH, tq7x.CapacitorLabourH, tq7x.FanLabourH = 2, 2, 0.5
	tq7x.LeadTimeDays = 28
	tq7x.Notes = noteModelTQ7X

	tq22 := newModel(modelTQ22, makerTQ, 45, 22, 38, 18.5)
	tq22.Enclosure = store.EnclosureSpec{NEMAType: "1", IPCode: "IP21"}
	tq22.LossesFraction, tq22.BusTripV = 0.03, 800
	tq22.Fan.L10H = 30000
	tq22.DriveCost, tq22.CapacitorKitCost, tq22.FanKitCost = 3100, 320, 90
	tq22.DriveLabourH, tq22.CapacitorLabourH, tq22.FanLabourH = 3, 2.5, 0.75
	tq22.LeadTimeDays = 28
	tq22.Notes = noteModelTQ22

	kv := func(r store.DriveModel, size string, airA, airB, hsA, hsB, ripple, uf, esr float64) *modelSpec {
		return &modelSpec{row: r, prefix: serialPrefixKV, size: size, airA: airA, airB: airB, hsA: hsA, hsB: hsB,
			rippleV: ripple, logsInternal: true, logsRipple: true, logsLife: true, bankUF: uf, bankESR: esr}
	}
	tq := func(r store.DriveModel, size string, airA, airB, hsA, hsB, ripple, uf, esr float64) *modelSpec {
		return &modelSpec{row: r, prefix: serialPrefixTQ, size: size, airA: airA, airB: airB, hsA: hsA, hsB: hsB,
			rippleV: ripple, bankUF: uf, bankESR: esr}
	}
	m45x := kv(kv45x, "45", 7, 22, 5, 36, 16, 3900, 24)
	m45x.logsPeak = true
	m110 := kv(kv110, "110", 5, 14, 3, 30, 18, 9400, 11)
	m110.logsPeak, m110.logsBank = true, true
	return []*modelSpec{
		kv(kv11, "11", 8, 34, 4, 38, 14, 1100, 62),
		kv(kv11x, "11", 8, 30, 5, 40, 14, 1100, 62),
		kv(kv45, "45", 6, 18, 4, 34, 16, 3900, 24),
		m45x,
		m110,
		tq(tq7, "7", 3, 8, 3, 35, 15, 820, 80),
		tq(tq7x, "7", 8, 28, 5, 40, 15, 820, 80),
		tq(tq22, "22", 4, 12, 4, 34, 16, 2200, 38),
	}
}

// siteDef is a site with the climate its weather is drawn from.
type siteDef struct {
	row store.Site
	// meanC is the yearly mean outdoor air; seasonalK and dailyK the
	// amplitudes of the yearly and daily cycles; anomalyK the spread of
	// day-to-day weather.
	meanC, seasonalK, dailyK, anomalyK float64
}

// fleetSites returns the five sites: four on a warm coast, one (the
// treatment works) inland at 900 m.
func fleetSites() []*siteDef {
	site := func(name string, elev, lo, hi float64, notes string, mean, seas, daily, anom float64) *siteDef {
		return &siteDef{row: store.Site{Name: name, ElevationM: elev, TimeZone: zoneName, AmbientMinC: lo, AmbientMaxC: hi, Notes: notes},
			meanC: mean, seasonalK: seas, dailyK: daily, anomalyK: anom}
	}
	return []*siteDef{
		site(siteIntake, 12, 4, 40, noteSiteIntake, 21, 5.5, 4, 2),
		site(siteWorks, 900, -4, 36, noteSiteWorks, 15.5, 7, 6, 2.5),
		site(siteBoosters, 60, 4, 40, noteSiteBoosters, 21, 5.5, 4, 2),
		site(siteLift, 5, 4, 40, noteSiteLift, 21, 5.5, 4, 2),
		site(siteWastewater, 8, 4, 40, noteSiteWastewater, 21, 5.5, 4, 2),
	}
}

// areaDef is an area with how its air follows the weather:
//
//	air = site mean + offsetK + coupling × (outdoor − site mean) + sunK × sun
//
// (sun the share of design irradiance at the hour, smoothed over a few
// hours as walls and roofs store heat).
type areaDef struct {
	site *siteDef
	row  store.Area
	// offsetK, coupling and sunK as above.
	offsetK, coupling, sunK float64
}

func env(loc health.Location, sun health.Sun, lo, hi float64, water health.Water, dust health.Dust,
	cond, salt bool, corr health.Corrosion) store.Environment {
	return store.Environment{Location: loc, Sun: sun, AmbientMinC: lo, AmbientMaxC: hi, Water: water, Dust: dust,
		Oil: health.OilNone, Condensation: cond, SaltAir: salt, Corrosion: corr}
}

// fleetAreas returns the areas of the sites returned by fleetSites, in the
// same order as the sites.
func fleetAreas(sites []*siteDef) []*areaDef {
	in, out := health.Indoor, health.Outdoor
	area := func(s *siteDef, name, notes string, e store.Environment, off, coup, sun float64) *areaDef {
		return &areaDef{site: s, row: store.Area{Name: name, Environment: e, Notes: notes}, offsetK: off, coupling: coup, sunK: sun}
	}
	intake, works, boost, lift, ww := sites[0], sites[1], sites[2], sites[3], sites[4]
	return []*areaDef{
		area(intake, areaIntakeDeck, noteAreaIntake,
			env(out, health.SunFull, 4, 40, health.WaterSplashing, health.DustWindblown, true, true, health.CorrosionG2), 0, 1, 0),
		area(works, areaDosing, noteAreaDosing,
			env(in, health.SunNone, 10, 35, health.WaterSplashing, health.DustNone, false, false, health.CorrosionG3), 6.5, 0.5, 0),
		area(works, areaFilters, noteAreaFilters,
			env(in, health.SunNone, 8, 30, health.WaterDripping, health.DustNone, false, false, health.CorrosionG1), 1.5, 0.35, 0),
		area(works, areaHighLift, noteAreaHighLift,
			env(in, health.SunNone, 10, 45, health.WaterDripping, health.DustSettling, false, false, health.CorrosionG1), 15, 0.55, 0),
		area(works, areaStores, noteAreaStores,
			env(in, health.SunNone, 10, 30, health.WaterNone, health.DustNone, false, false, health.CorrosionG1), 4, 0.3, 0),
		area(boost, areaKiosksSun, noteAreaKioskSun,
			env(in, health.SunNone, 10, 55, health.WaterNone, health.DustSettling, true, true, health.CorrosionG2), 15, 0.9, 8),
		area(boost, areaKiosksShade, noteAreaKioskShad,
			env(in, health.SunNone, 8, 48, health.WaterNone, health.DustSettling, true, true, health.CorrosionG2), 10, 0.85, 2.5),
		area(lift, areaLiftPanels, noteAreaLift,
			env(in, health.SunNone, 8, 38, health.WaterDripping, health.DustNone, true, true, health.CorrosionGX), 3, 0.6, 0),
		area(ww, areaDewatering, noteAreaDewater,
			env(in, health.SunNone, 5, 38, health.WaterHoseDown, health.DustNone, true, true, health.CorrosionG2), 0, 0.6, 0),
		area(ww, areaBlowers, noteAreaBlowers,
			env(in, health.SunNone, 5, 40, health.WaterNone, health.DustSettling, false, true, health.CorrosionG2), 7, 0.6, 0),
		area(ww, areaCoolingTowers, noteAreaTowers,
			env(out, health.SunFull, 4, 40, health.WaterSplashing, health.DustWindblown, true, true, health.CorrosionG2), 0, 1, 0),
	}
}

// shape is the duty a position's drive carries: how it starts, stops and
// loads through the day and the year.
type shape int

const (
	shapeScour      shape = iota // runs two hours each morning
	shapeRawWater                // duty/standby river pumps following demand
	shapeScreen                  // band screens, in cycles and after rain
	shapeScreenWash              // wash pumps with the screens
	shapeSump                    // sump drainer, now and then
	shapeDosing                  // flow-paced dosing pumps, always running
	shapeWashwater               // washwater recovery, tank level
	shapeBackwash                // backwash pumps and air scour blowers, filter by filter
	shapeSteadyBlow              // air scour blower on a day shift at fixed speed
	shapeHighLift                // high-lift pumps on the energy tariff
	shapeBooster                 // pressure-controlled booster pumps
	shapeLift                    // sewage lift pumps, duty and standby
	shapeCentrifuge              // decanter centrifuges in daily batches
	shapeFeed                    // sludge feed pumps with the centrifuges
	shapeConveyor                // cake conveyors with the centrifuges
	shapeMixer                   // polymer mixer, every other hour
	shapeBlower                  // aeration blowers following the inflow
	shapeTowerFan                // cooling-tower fans following the weather
)

// cabinetKind is how a cabinet-mounted position's cabinet is cooled.
type cabinetKind int

const (
	cabinetNone cabinetKind = iota
	cabinetAirConditioned
	cabinetSealedSun
)

// posPlan is one position: its register row and everything the generator
// needs to make its readings and history.
type posPlan struct {
	idx   int
	row   store.Position
	area  *areaDef
	model *modelSpec
	shape shape
	// group, rank and size place the position in a duty/standby group.
	group      string
	rank, size int
	// xFull is the running load at full speed or full duty, as a share of
	// the model's normal-duty rated current.
	xFull   float64
	cabinet cabinetKind
	// sunlit is true for a drive in its own enclosure in the sun.
	sunlit bool
	// Planted problems, and whether any is planted here (no unit at such a
	// position fails in the last 400 days, so the planted evidence stays
	// on one unit).
	plantSilent, plantRipple, plantRegen, plantHotKiosk bool
	isPlanted                                           bool
	// fLo and fSpan set a booster's speed range: fLo + fSpan × demand.
	fLo, fSpan float64

	// Profile of a typical year at the position (from profilePositions).
	prof profile
	// Reading-year history (from the history simulation).
	stints []stint
	stops  []stop
}

// fleetPositions returns the eighty positions.
func fleetPositions(areas []*areaDef, models []*modelSpec) []*posPlan {
	byModel := map[string]*modelSpec{}
	for _, m := range models {
		byModel[m.row.Name] = m
	}
	intake, dosing, filters, hall := areas[0], areas[1], areas[2], areas[3]
	kSun, kShade, lift, dewater, blowers, towers := areas[5], areas[6], areas[7], areas[8], areas[9], areas[10]
	var out []*posPlan
	add := func(a *areaDef, prefix, kind string, n int, desc, model string, sh shape, x float64, crit health.Criticality) *posPlan {
		p := &posPlan{area: a, model: byModel[model], shape: sh, xFull: x}
		p.row = store.Position{
			Tag: fmt.Sprintf(tagFormat, prefix, kind, n), Description: desc, Mounting: health.MountingOwn,
			SupplyVoltageV: 400, SupplyPhases: 3, SupplyFrequencyHz: 50, CarrierKHz: 4,
			Duty: health.DutyNormal, Criticality: crit,
		}
		p.sunlit = a.row.Environment.Location == health.Outdoor
		p.fLo, p.fSpan = 30, 20
		out = append(out, p)
		return p
	}
	group := func(ps []*posPlan, name string) {
		for i, p := range ps {
			p.group, p.rank, p.size = name, i, len(ps)
		}
	}

	// Intake.
	p := add(intake, tagIntake, tagKindPump, 1, descScourPump, modelTQ22, shapeScour, 0.62, health.CriticalityC)
	p.row.Notes = notePosScour
	var raw []*posPlan
	for i := 2; i <= 5; i++ {
		raw = append(raw, add(intake, tagIntake, tagKindPump, i, fmt.Sprintf(descRawWaterPump, i-1), modelKV45X, shapeRawWater, 0.76, health.CriticalityA))
	}
	group(raw, "raw")
	p = add(intake, tagIntake, tagKindScr, 1, fmt.Sprintf(descBandScreen, 1), modelKV11, shapeScreen, 0.42, health.CriticalityB)
	p.row.Mounting, p.cabinet, p.sunlit = health.MountingCabinet, cabinetSealedSun, false
	p.row.Cabinet = store.Cabinet{NEMAType: "4X", IPCode: "IP66", Cooling: health.CoolingSealed, Material: health.MaterialStainless,
		AbsorptanceFraction: 0.45, HeightM: 1.2, WidthM: 0.8, DepthM: 0.4, Placement: health.PlacementAgainstWall, OtherLossesW: 80}
	p.row.Notes = notePosCabinet
	add(intake, tagIntake, tagKindScr, 2, fmt.Sprintf(descBandScreen, 2), modelKV11X, shapeScreen, 0.42, health.CriticalityB)
	add(intake, tagIntake, tagKindWash, 1, fmt.Sprintf(descScreenWash, 1), modelKV11X, shapeScreenWash, 0.6, health.CriticalityC)
	add(intake, tagIntake, tagKindWash, 2, fmt.Sprintf(descScreenWash, 2), modelKV11X, shapeScreenWash, 0.6, health.CriticalityC)
	add(intake, tagIntake, tagKindDrain, 1, descSumpDrainer, modelTQ7X, shapeSump, 0.5, health.CriticalityC)

	// Treatment works: dosing room.
	for i := 1; i <= 3; i++ {
		m := modelKV11X
		if i == 2 {
			m = modelTQ7X
		}
		p = add(dosing, tagDosing, tagKindPump, i, fmt.Sprintf(descDosingPump, i), m, shapeDosing, 0.45, health.CriticalityA)
		if i == 2 {
			p.row.Notes = notePosDosingOld
		}
	}
	for i := 1; i <= 3; i++ {
		add(dosing, tagDosing, tagKindPump, i+3, fmt.Sprintf(descHypoPump, i), modelKV11X, shapeDosing, 0.4, health.CriticalityA)
	}

	// Filter gallery.
	for i := 1; i <= 4; i++ {
		add(filters, tagFilters, tagKindPump, i, fmt.Sprintf(descWashwaterPump, i), modelKV11, shapeWashwater, 0.62, health.CriticalityC)
	}
	var bw []*posPlan
	for i := 1; i <= 2; i++ {
		bw = append(bw, add(filters, tagFilters, tagKindPump, i+4, fmt.Sprintf(descBackwashPump, i), modelKV45, shapeBackwash, 0.7, health.CriticalityB))
	}
	group(bw, "backwash")
	var scour []*posPlan
	for i := 1; i <= 2; i++ {
		scour = append(scour, add(filters, tagFilters, tagKindBlow, i, fmt.Sprintf(descAirScour, i), modelKV45, shapeBackwash, 0.66, health.CriticalityB))
	}
	group(scour, "scour")
	p = add(filters, tagFilters, tagKindBlow, 3, fmt.Sprintf(descAirScour, 3), modelKV45, shapeSteadyBlow, 0.773, health.CriticalityB)
	p.row.CarrierKHz = 10
	p.row.Notes = notePosCarrier

	// High-lift pump hall.
	var hl []*posPlan
	for i := 1; i <= 9; i++ {
		hl = append(hl, add(hall, tagHighLift, tagKindPump, i, fmt.Sprintf(descHighLiftPump, i), modelKV110, shapeHighLift, 0.74, health.CriticalityA))
	}
	group(hl, "highlift")

	// Booster kiosks.
	sunLoads := []float64{0.6, 0.58, 0.74, 0.56, 0.6}
	for i, x := range sunLoads {
		p = add(kSun, tagBoosters, tagKindPump, i+1, fmt.Sprintf(descBoosterPump, i+1), modelKV11, shapeBooster, x, health.CriticalityB)
		if i == 2 {
			// The hilltop zone's booster holds a high pressure set point
			// and runs near full speed all day.
			p.plantHotKiosk = true
			p.fLo, p.fSpan = 45, 5
			p.row.Notes = notePosKioskHot
		}
	}
	shadeLoads := []float64{0.6, 0.55, 0.62, 0.58, 0.6, 0.52, 0.57}
	for i, x := range shadeLoads {
		add(kShade, tagBoosters, tagKindPump, i+6, fmt.Sprintf(descBoosterPump, i+6), modelKV11, shapeBooster, x, health.CriticalityB)
	}

	// Lift stations: eight stations with a duty and a standby pump each,
	// every drive in an air-conditioned stainless cabinet.
	for st := 1; st <= 8; st++ {
		var pair []*posPlan
		for k, letter := range []string{liftPumpDuty, liftPumpStandby} {
			n := 2*(st-1) + k + 1
			m := modelKV11
			x := 0.5
			if n >= 13 {
				m, x = modelTQ7, 0.55
			}
			if st == 5 {
				x = 0.36
			}
			p = add(lift, tagLift, tagKindPump, n, fmt.Sprintf(descLiftPump, st, letter), m, shapeLift, x, health.CriticalityA)
			p.row.Mounting, p.cabinet, p.sunlit = health.MountingCabinet, cabinetAirConditioned, false
			p.row.Cabinet = store.Cabinet{NEMAType: "4X", IPCode: "IP66", Cooling: health.CoolingAirConditioned, Material: health.MaterialStainless,
				AbsorptanceFraction: 0.45, HeightM: 1.2, WidthM: 0.8, DepthM: 0.4, Placement: health.PlacementAgainstWall,
				CoolingCapacityW: 900, SetPointC: 30, OtherLossesW: 60}
			pair = append(pair, p)
		}
		group(pair, fmt.Sprintf("lift%d", st))
		if st == 5 {
			// Station 5 hangs on a single-phase rural spur: pump A without
			// its derate (planted), pump B with it.
			for _, q := range pair {
				q.row.SupplyPhases = 1
				q.row.SupplyVoltageV = 400
			}
			pair[0].row.Notes = notePosSinglePh
			pair[1].row.SinglePhaseDerateSet = true
		}
		if st == 6 {
			pair[1].plantSilent = true
			pair[1].row.Notes = notePosSilent
		}
	}

	// Wastewater works: dewatering hall.
	var cent []*posPlan
	for i := 1; i <= 3; i++ {
		p = add(dewater, tagDewater, tagKindCent, i, fmt.Sprintf(descCentrifuge, i), modelKV45X, shapeCentrifuge, 0.45, health.CriticalityA)
		p.row.Duty = health.DutyHeavy
		if i == 2 {
			p.plantRegen = true
			p.row.Notes = notePosRegen
		}
		cent = append(cent, p)
	}
	group(cent, "centrifuge")
	var feed []*posPlan
	for i := 1; i <= 4; i++ {
		feed = append(feed, add(dewater, tagDewater, tagKindPump, i, fmt.Sprintf(descSludgeFeed, i), modelKV11X, shapeFeed, 0.55, health.CriticalityB))
	}
	group(feed, "feed")
	for i := 1; i <= 2; i++ {
		p = add(dewater, tagDewater, tagKindConv, i, fmt.Sprintf(descCakeConveyor, i), modelKV11X, shapeConveyor, 0.45, health.CriticalityB)
		p.row.Duty = health.DutyHeavy
	}
	add(dewater, tagDewater, tagKindMix, 1, descPolymerMixer, modelTQ7, shapeMixer, 0.42, health.CriticalityC)

	// Aeration blower house.
	var bl []*posPlan
	for i := 1; i <= 4; i++ {
		p = add(blowers, tagBlowers, tagKindBlow, i, fmt.Sprintf(descAerationBlower, i), modelKV45, shapeBlower, 0.74, health.CriticalityA)
		if i == 2 {
			p.plantRipple = true
			p.row.Notes = notePosRipple
		}
		bl = append(bl, p)
	}
	group(bl, "aeration")

	// Cooling-tower platform.
	for i := 1; i <= 4; i++ {
		add(towers, tagTowers, tagKindFan, i, fmt.Sprintf(descTowerFan, i), modelKV11X, shapeTowerFan, 0.78, health.CriticalityB)
	}

	for i, p := range out {
		p.idx = i
	}
	return out
}
