package demo

import (
	"iter"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"kelvard/health"
)

// This file makes the hourly readings of a position: the process (when the
// drive runs, at what speed and load), the air and heatsink temperatures,
// the DC bus, and the counters and life estimates the drive reports.
//
// Each position has its own random stream. Every hour draws the same
// numbers whether or not a reading is written, so the readings of one
// position never depend on another's, nor on gaps in its own history.

// profile is a position's typical year, from one pass over the reading
// year with a generic drive standing there all year.
type profile struct {
	// capPerH and fanPerH are the mean Miner damage per hour of the
	// capacitor bank (10-degree rule) and the fan (L10 halving rule).
	capPerH, fanPerH float64
	// runShare is the share of hours the drive runs.
	runShare float64
	// airC is the mean air around the capacitors (inside the drive or its
	// cabinet); coreC the mean capacitor core temperature.
	airC, coreC float64
	// p95X is the 95th percentile of running load (share of normal-duty
	// rated current).
	p95X float64
}

// stint is one stay of a drive at a position that overlaps the reading
// year, with the drive's state at the later of its start and the start of
// the reading year.
type stint struct {
	serial   string
	from, to time.Time
	// deadFrom is when the drive failed in place (no readings after); zero
	// when it did not.
	deadFrom time.Time
	// capD0 and fanD0 are the life used, runH0 and onH0 the run and
	// power-on hours, and bankAgeH0 the capacitor bank's age, at the start.
	capD0, fanD0, runH0, onH0, bankAgeH0 float64
	// resets are component replacements made in place during the stay.
	resets []reset
	// hsFactor and airFactor scale the heatsink and internal air rises of
	// this unit (units of one model differ a little).
	hsFactor, airFactor float64
}

// reset is a component replaced in place.
type reset struct {
	at   time.Time
	kind health.ComponentKind
}

// stop is a time the drive stood still although the process wanted it: a
// trip until the operator reset it, or a failed fan until it was replaced.
type stop struct {
	from, to time.Time
	// decel marks an over-voltage trip while decelerating.
	decel bool
}

// posGen generates one position's hours.
type posGen struct {
	c       *regionClimate
	p       *posPlan
	seed    uint64
	siteIdx int
	rng     *rand.Rand
	ratings health.Ratings
	offset  float64
	// Thermal and supply state carried from hour to hour.
	air, hs, line float64
	started       bool
	// Day-level decisions, cached for the current local day.
	day      int64
	cent     [3]centrifugeDay
	dayDraws [4]float64
}

// hour is one generated hour before it becomes a reading.
type hour struct {
	running, accel, decel bool
	f, x, peakX           float64
	ambient, air, hs      float64
	busV, ripple          float64
	// capNoise and esrNoise are drawn every hour for the daily bank
	// measurement, so that writing it does not shift the stream.
	capNoise, esrNoise float64
}

func newPosGen(s *Scenario, p *posPlan) *posGen {
	g := &posGen{c: s.climate, p: p, seed: s.Seed, day: math.MinInt64}
	g.siteIdx = siteIndex(s, p)
	g.rng = rand.New(rand.NewPCG(mix(s.Seed, 0x7265616469), uint64(p.idx)))
	g.ratings = ratingsOf(p.model.row)
	// The ambient sensor sits a little warmer or cooler than the area's
	// average air.
	g.offset = 1.2 * (g.rng.Float64() - 0.5)
	return g
}

func siteIndex(s *Scenario, p *posPlan) int {
	for i, st := range s.Sites {
		if st.Name == p.area.site.row.Name {
			return i
		}
	}
	return 0
}

// mix combines two numbers into a well-spread seed (the finaliser of
// SplitMix64).
func mix(a, b uint64) uint64 {
	z := a ^ (b + 0x9e3779b97f4a7c15 + (a << 6) + (a >> 2))
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// localDay returns the local day number (days since 1970-01-01, local
// time) of an instant.
func localDay(t time.Time) int64 {
	return int64(math.Floor(float64(t.Add(localOffset).Unix()) / 86400))
}

// centrifugeDay is one centrifuge's batch on one day: whether it runs, and
// the local hours its start and end fall in.
type centrifugeDay struct {
	runs       bool
	start, end int
}

// centrifugeSchedule returns centrifuge j's batch on local day d. It is a
// pure function of the seed, j and d, so the feed pumps, the conveyors and
// the trip history all see the same batches.
func centrifugeSchedule(seed uint64, j int, d int64) centrifugeDay {
	r := rand.New(rand.NewPCG(mix(seed, 0x63656e74+uint64(j)), uint64(d)))
	wd := time.Unix(d*86400, 0).UTC().Weekday()
	u1, u2 := r.Float64(), r.Float64()
	if wd == time.Saturday || wd == time.Sunday || u1 > 0.92 {
		return centrifugeDay{}
	}
	return centrifugeDay{runs: true, start: 6, end: 19 + int(u2*3)}
}

// centrifugePhase says what centrifuge j does in the local hour hl of its
// day: 0 stopped, 1 accelerating, 2 running, 3 decelerating.
func centrifugePhase(cd centrifugeDay, hl int) int {
	switch {
	case !cd.runs:
		return 0
	case hl == cd.start:
		return 1
	case hl > cd.start && hl < cd.end:
		return 2
	case hl == cd.end:
		return 3
	}
	return 0
}

func (g *posGen) newDay(d int64) {
	g.day = d
	for j := range g.cent {
		g.cent[j] = centrifugeSchedule(g.seed, j, d)
	}
	r := rand.New(rand.NewPCG(mix(g.seed, 0x646179+uint64(g.p.idx)), uint64(d)))
	for i := range g.dayDraws {
		g.dayDraws[i] = r.Float64()
	}
}

// pumpX is the output current of a speed-controlled centrifugal machine at
// output frequency f: a magnetising part plus a torque part that grows with
// the square of speed (affinity laws), as a share of rated current.
func pumpX(xFull, f float64) float64 {
	const xMag = 0.22
	r := f / 50
	return xMag + (xFull-xMag)*r*r
}

// process decides whether the drive runs in hour h, and at what output
// frequency and load.
func (g *posGen) process(h int, z *[12]float64, u *[3]float64) (run bool, f, x float64, accel, decel bool) {
	c, p := g.c, g.p
	hl := c.localHour(h)
	ihl := int(hl)
	d := c.day[h]
	if d != g.day {
		g.newDay(d)
	}
	week := int((d + 3) / 7) // weeks start on Monday
	dem, rain, inflow := c.demand[h], c.rain[h], c.inflow[h]
	switch p.shape {
	case shapeScour:
		run, f, x = ihl >= 5 && ihl < 7, 50, p.xFull*(1+0.01*z[0])
	case shapeRawWater:
		k := 2
		if dem > 0.72 {
			k = 3
		}
		run = (p.rank+week)%p.size < k
		f = 40 + 10*dem + 0.3*z[0]
		x = pumpX(p.xFull, f)
	case shapeScreen, shapeScreenWash:
		run = ihl%3 == 0 || rain > 0.35
		f, x = 30, p.xFull*(0.92+0.08*u[0])
		if p.shape == shapeScreenWash {
			f, x = 50, p.xFull*(1+0.01*z[0])
		}
	case shapeSump:
		run, f, x = u[0] < 0.12+0.5*rain, 50, p.xFull*(1+0.02*z[0])
	case shapeDosing:
		run = true
		f = 18 + 30*dem + 0.2*z[0]
		x = 0.18 + (p.xFull-0.18)*f/48
	case shapeWashwater:
		run, f, x = u[0] < 0.38, 46, p.xFull*(0.95+0.05*u[1])
	case shapeBackwash:
		// Eight filters, one backwash every three hours; the group's
		// pumps (or blowers) take turns.
		slot := (ihl + 2) / 3
		run = (ihl-1)%3 == 0 && ihl >= 1 && slot%p.size == p.rank
		f, x = 50, p.xFull*(1+0.012*z[0])
	case shapeSteadyBlow:
		run, f, x = ihl >= 8 && ihl < 16, 50, p.xFull*(1+0.008*z[0])
	case shapeHighLift:
		// More pumps at night on the cheap tariff, fewest at the evening
		// peak tariff.
		k := 4
		switch {
		case ihl >= 23 || ihl < 6:
			k = 6
		case ihl >= 17 && ihl < 20:
			k = 3
		}
		if dem > 0.8 {
			k++
		}
		run = (p.rank+week)%p.size < k
		f = 42 + 8*dem + 0.3*z[0]
		x = pumpX(p.xFull, f)
	case shapeBooster:
		run = dem > 0.3 || u[0] < 0.3
		f = p.fLo + p.fSpan*dem + 0.4*z[0]
		x = pumpX(p.xFull, f)
	case shapeLift:
		in := inflow * (0.85 + 0.1*g.dayDraws[0])
		duty := int(d%2) == p.rank
		run = (duty && in > 0.3) || (!duty && in > 1.05)
		f = 28 + 20*math.Min(in, 1) + 0.3*z[0]
		x = pumpX(p.xFull, f)
	case shapeCentrifuge:
		switch centrifugePhase(g.cent[p.rank%3], ihl) {
		case 1:
			run, accel, f, x = true, true, 30, 0.6*(1+0.02*z[0])
		case 2:
			run, f, x = true, 48.5+0.1*z[1], p.xFull*(1+0.06*z[0])
		case 3:
			run, decel, f, x = true, true, 16, 0.2*(1+0.05*z[0])
		}
	case shapeFeed:
		// Three of the four feed pumps serve the three centrifuges; the
		// fourth stands by, a different one each week.
		standby := week % p.size
		if p.rank != standby {
			j := p.rank
			if p.rank > standby {
				j--
			}
			run = centrifugePhase(g.cent[j], ihl) == 2
		}
		f, x = 40+4*u[1], p.xFull*(0.92+0.06*u[0])
	case shapeConveyor:
		for j := range g.cent {
			if centrifugePhase(g.cent[j], ihl) != 0 {
				run = true
			}
		}
		f, x = 40, p.xFull*(1+0.08*z[0])
	case shapeMixer:
		run, f, x = ihl%2 == 0, 50, p.xFull*(1+0.02*z[0])
	case shapeBlower:
		lag := inflow
		if h >= 2 {
			lag = c.inflow[h-2]
		}
		switch {
		case p.rank < 2:
			run = true
		case p.rank == 2+week%2:
			run = lag > 0.95
		}
		f = 35 + 15*math.Min(lag/1.1, 1) + 0.3*z[0]
		r := f / 50
		x = 0.28 + (p.xFull-0.28)*r*math.Sqrt(r)
	case shapeTowerFan:
		f = math.Min(50, 18+2.6*(c.outC[g.siteIdx][h]-12)+0.5*z[0])
		run = f >= 22
		r := f / 50
		x = 0.25*r + (p.xFull-0.25)*r*r
	}
	if !run {
		return false, 0, 0, false, false
	}
	return true, f, x * (1 + 0.012*z[1]), accel, decel
}

// step generates hour h. stopped forces the drive to stand still; decelTrip
// marks an over-voltage trip in a deceleration hour; hsF and airF are the
// unit's heatsink and internal air factors.
func (g *posGen) step(h int, stopped, decelTrip bool, hsF, airF float64) hour {
	var z [12]float64
	var u [3]float64
	for i := range z {
		z[i] = g.rng.NormFloat64()
	}
	for i := range u {
		u[i] = g.rng.Float64()
	}
	c, p, m := g.c, g.p, g.p.model
	run, f, x, accel, decel := g.process(h, &z, &u)
	if stopped && !(decelTrip && decel) {
		run, f, x, accel, decel = false, 0, 0, false, false
	}
	if decelTrip && decel {
		f, x = 12, 0.15
	}
	var o hour
	o.running, o.f, o.x, o.accel, o.decel = run, f, x, accel, decel
	o.capNoise, o.esrNoise = z[10], z[11]
	sun := c.sun[g.siteIdx][h]
	o.ambient = c.areaAir(p.area, g.siteIdx, h) + g.offset + 0.15*z[2]

	// Air around the capacitors: inside the drive, or the cabinet air.
	var target, tau float64
	switch p.cabinet {
	case cabinetNone:
		target = o.ambient + 0.45*m.airA
		if run {
			target = o.ambient + airF*(m.airA+m.airB*x*x)
		}
		if p.sunlit {
			target += 9 * sun
		}
		tau = 1.2
	case cabinetAirConditioned, cabinetSealedSun:
		loss := health.DriveLossesW(g.ratings, p.row.Duty, health.DefaultLossModel(), x*g.ratings.NormalDutyA) + p.row.Cabinet.OtherLossesW
		cab := cabinetOf(p.row.Cabinet, p.area.row.Environment.Sun)
		// The design model counts all absorbed sun as heat inside; a real
		// cabinet sheds most of it from its outer skin, so the logged air
		// follows the same balance with the sun cut to a fifth
		// (kelvard's demo assumption, not a published factor).
		heat, err := health.CabinetAir(cab, o.ambient, loss, sun/5, health.DefaultCabinetParams())
		target = o.ambient + 5
		if err == nil {
			target = heat.InternalAirC
		}
		tau = 2
		if p.cabinet == cabinetAirConditioned {
			tau = 0.7
		}
	}
	if !g.started {
		g.air, g.hs, g.started = target, o.ambient, true
	}
	g.air += (target - g.air) * (1 - math.Exp(-1/tau))
	o.air = g.air + 0.15*z[3]
	if p.cabinet == cabinetAirConditioned {
		o.air = g.air + 0.35*z[3] // the cooler cycles around its set point
	}

	around := o.ambient
	if p.cabinet != cabinetNone {
		around = g.air
	} else if p.sunlit {
		around += 5 * sun
	}
	hsTarget := around + 1.5
	if run {
		hsTarget = around + hsF*(m.hsA+m.hsB*x*math.Sqrt(x))
	}
	g.hs += (hsTarget - g.hs) * (1 - math.Exp(-1/0.8))
	o.hs = g.hs + 0.2*z[4]

	// Supply and DC bus: the line sags by day and rises at night by about
	// a per cent either way; the bus follows ExpectedBusV (√2 × line at
	// light load, 3√2/π × line under load; power electronics handbooks).
	hl := c.localHour(h)
	g.line = 0.9*g.line + 0.004*z[5]
	line := p.row.SupplyVoltageV * (1 + 0.012*math.Cos(2*math.Pi*(hl-3)/24) + g.line)
	switch {
	case !run:
		o.busV = math.Sqrt2 * line
	case p.row.SupplyPhases == 1:
		// A single-phase feed sags further under load.
		o.busV = line * (math.Sqrt2 - 0.26*x)
	default:
		o.busV = health.ExpectedBusV(line, x, health.DefaultDCBusParams())
	}
	if decel {
		// Energy from the slowing bowl lifts the bus; centrifuges 1 and 3
		// have braking resistors, centrifuge 2 relies on its ramp.
		if p.plantRegen {
			o.busV += 50 + 15*u[2]
			if decelTrip {
				o.busV += 45 + 10*u[2]
			}
		} else {
			o.busV += 20 + 8*u[2]
		}
	}
	o.busV += 1.2 * z[6]

	// Ripple grows with load (DESIGN.md section 3); a single-phase feed
	// makes far more of it.
	if run {
		r := 1 + m.rippleV*x
		if p.row.SupplyPhases == 1 {
			r = 3 + 4.2*m.rippleV*x
		}
		o.ripple = r * (1 + 0.04*z[7]) * g.rippleGrowth(c.hourAt(h))
	} else {
		o.ripple = 0.4 + 0.15*math.Abs(z[7])
	}

	if run {
		o.peakX = x * (1.05 + 0.04*math.Abs(z[8]))
		if accel {
			o.peakX = 1.3 * g.ratings.HeavyDutyA / g.ratings.NormalDutyA * (1 + 0.03*math.Abs(z[8]))
		}
	}
	return o
}

// rippleGrowth is the planted capacitor ageing of the blower whose ripple
// climbs: ripple at the same load grows from 1× to about 2.3× over the last
// 160 days, faster towards the end.
func (g *posGen) rippleGrowth(t time.Time) float64 {
	if !g.p.plantRipple {
		return 1
	}
	const span = 160 * 24 * time.Hour
	end := g.c.start.Add(hoursPerYear * time.Hour)
	from := end.Add(-span)
	if t.Before(from) {
		return 1
	}
	s := float64(t.Sub(from)) / float64(span)
	return 1 + 1.3*math.Pow(s, 1.3)
}

// profilePosition runs the reading year with a generic unit standing at the
// position all year and returns its profile.
func profilePosition(s *Scenario, p *posPlan) profile {
	g := newPosGen(s, p)
	spec := p.model.row
	var pr profile
	var xs []float64
	for h := range hoursPerYear {
		o := g.step(h, false, false, 1, 1)
		core := capacitorCoreC(spec.Capacitor, o.air, o.x)
		pr.capPerH += 1 / capacitorLifeH(spec.Capacitor, core)
		if o.running || spec.Fan.Runs == health.FanAlways {
			pr.fanPerH += 1 / fanLifeH(spec.Fan, o.air)
		}
		if o.running {
			pr.runShare++
			xs = append(xs, o.x)
		}
		pr.airC += o.air
		pr.coreC += core
	}
	n := float64(hoursPerYear)
	pr.capPerH /= n
	pr.fanPerH /= n
	pr.runShare /= n
	pr.airC /= n
	pr.coreC /= n
	if len(xs) > 0 {
		slices.Sort(xs)
		pr.p95X = xs[int(0.95*float64(len(xs)-1))]
	}
	return pr
}

// positionReadings generates the readings of one position from its stints.
func (s *Scenario) positionReadings(p *posPlan) iter.Seq[Reading] {
	return func(yield func(Reading) bool) {
		for lh := range s.lifeHours(p) {
			if lh.emit && !yield(lh.r) {
				return
			}
		}
	}
}

// lifeHour is one hour of a unit at a position: the reading (when one is
// written) and the life the unit's bank and fan used, as the generator
// accounts it.
type lifeHour struct {
	r    Reading
	emit bool
	// serial is the unit standing there; capD and fanD its life used after
	// the hour; dCap and dFan what the hour used.
	serial                 string
	capD, fanD, dCap, dFan float64
}

// lifeHours generates every hour a unit stands at the position (whether or
// not a reading is written), in time order.
func (s *Scenario) lifeHours(p *posPlan) iter.Seq[lifeHour] {
	return func(yield func(lifeHour) bool) {
		g := newPosGen(s, p)
		spec := p.model.row
		m := p.model
		site := p.area.site.row.Name
		si, stopI := 0, 0
		var cur *stint
		var capD, fanD, runH, onH, bankAge float64
		resetI := 0
		silentAfter := s.Now.Add(-silentHours * time.Hour)
		for h := range hoursPerYear {
			t := s.climate.hourAt(h)
			from := t.Add(-time.Hour)
			// The stay covering the whole hour, if any.
			for si < len(p.stints) && !p.stints[si].to.After(from) {
				si++
			}
			var st *stint
			if si < len(p.stints) && !p.stints[si].from.After(from) && !p.stints[si].to.Before(t) {
				st = &p.stints[si]
			}
			if st != cur && st != nil {
				cur = st
				capD, fanD, runH, onH, bankAge = st.capD0, st.fanD0, st.runH0, st.onH0, st.bankAgeH0
				resetI = 0
			}
			hsF, airF := 1.0, 1.0
			if st != nil {
				hsF, airF = st.hsFactor, st.airFactor
			}
			// Forced stops overlapping the hour.
			for stopI < len(p.stops) && !p.stops[stopI].to.After(from) {
				stopI++
			}
			stopped, decelTrip := false, false
			for k := stopI; k < len(p.stops) && p.stops[k].from.Before(t); k++ {
				if p.stops[k].to.After(from) {
					stopped = true
					decelTrip = decelTrip || p.stops[k].decel
				}
			}
			o := g.step(h, stopped, decelTrip, hsF, airF)
			if st == nil {
				continue
			}
			dead := !st.deadFrom.IsZero() && t.After(st.deadFrom)
			for resetI < len(st.resets) && !st.resets[resetI].at.After(t) {
				if st.resets[resetI].kind == health.ComponentCapacitors {
					capD, bankAge = 0, 0
				} else {
					fanD = 0
				}
				resetI++
			}
			if dead {
				continue
			}
			core := capacitorCoreC(spec.Capacitor, o.air, o.x)
			lh := lifeHour{serial: st.serial, dCap: 1 / capacitorLifeH(spec.Capacitor, core)}
			if o.running || spec.Fan.Runs == health.FanAlways {
				lh.dFan = 1 / fanLifeH(spec.Fan, o.air)
			}
			capD += lh.dCap
			fanD += lh.dFan
			lh.capD, lh.fanD = capD, fanD
			onH++
			bankAge++
			if o.running {
				runH++
			}
			if p.plantSilent && t.After(silentAfter) {
				if !yield(lh) {
					return
				}
				continue
			}
			r := Reading{
				Site: site, Position: p.row.Tag, At: t,
				InternalAirC: math.NaN(), AmbientC: round(o.ambient, 1), HeatsinkC: round(o.hs, 1),
				CurrentA: round(o.x*spec.NormalDutyCurrentA, 1), PeakCurrentA: math.NaN(),
				FrequencyHz: round(o.f, 1), BusV: round(o.busV, 0), BusRippleV: math.NaN(),
				RunHoursH: round(runH, 1), PowerOnHoursH: round(onH, 0),
				DriveCapacitorLifeUsedFraction: math.NaN(), DriveFanLifeUsedFraction: math.NaN(),
				CapacitanceUF: math.NaN(), ESRMilliohm: math.NaN(),
			}
			if m.logsInternal || p.cabinet != cabinetNone {
				r.InternalAirC = round(o.air, 1)
			}
			if m.logsPeak {
				r.PeakCurrentA = round(o.peakX*spec.NormalDutyCurrentA, 1)
			}
			if m.logsRipple {
				r.BusRippleV = round(o.ripple, 1)
			}
			if m.logsLife {
				r.DriveCapacitorLifeUsedFraction = round(capD, 4)
				r.DriveFanLifeUsedFraction = round(fanD, 4)
			}
			if m.logsBank && t.Add(localOffset).Hour() == 0 {
				// The drive measures its bank once a day at local midnight:
				// capacitance falls and ESR rises slowly with age.
				ageY := bankAge / 8760
				r.CapacitanceUF = round(m.bankUF*(1-0.006*ageY)+0.0015*m.bankUF*o.capNoise, 0)
				r.ESRMilliohm = round(m.bankESR*(1+0.035*ageY)+0.01*m.bankESR*o.esrNoise, 1)
			}
			lh.r, lh.emit = r, true
			if !yield(lh) {
				return
			}
		}
	}
}

// silentHours is how long before Now the silent position's readings stop.
const silentHours = 9*24 + 5

// round rounds v to the given number of decimals.
func round(v float64, decimals int) float64 {
	p := math.Pow10(decimals)
	r := math.Round(v*p) / p
	if r == 0 {
		return 0 // no negative zero
	}
	return r
}
