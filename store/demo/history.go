package demo

import (
	"cmp"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// This file simulates the eight years before Now: which drive stood where,
// when parts wore out or failed, how failed units were swapped for spares,
// repaired or scrapped, and the trips in between. It writes the
// installation, component and event rows and, for the reading year, each
// position's stays and forced stops.
//
// Failure model. Each wearing part and each other failure mode of a unit
// fails when its equivalent age (hours weighted by how hard the position
// works it) reaches a threshold drawn from a Weibull distribution; a part
// replaced starts a new age and a new threshold. The capacitor bank and the
// fan also fail when their Miner life used (10-degree rule and L10 halving
// rule, profile rates) reaches a threshold of its own. Planned maintenance
// replaces a capacitor kit at 70 % and a fan kit at 60 % of calculated
// life, so no drive in service nears the end of its calculated life except
// the one planted. The Weibull shapes and scales below are the demo's own
// choices (common practice in shape: wear-out parts above 1, electronics
// near 1); they are what a fit of the generated failures should roughly
// find again.

// hoursPerYearMean converts years of calendar time to hours.
const hoursPerYearMean = 8766

// Planned maintenance thresholds: life used at which a kit is replaced.
const (
	capacitorPMAt = 0.70
	fanPMAt       = 0.60
)

// unitMode is a failure mode of the unit other than the bank and the fan.
type unitMode struct {
	mode       health.FailureMode
	beta, etaY float64
}

func unitModes() []unitMode {
	return []unitMode{
		{health.FailurePowerModule, 1.3, 70},
		{health.FailureRectifier, 1.2, 110},
		{health.FailureSoftCharge, 1.1, 150},
		{health.FailureControlBoard, 1.1, 90},
		{health.FailurePowerSupply, 1.3, 110},
		{health.FailureConnections, 1.0, 180},
		{health.FailureOther, 1.0, 250},
	}
}

const nModes = 7

// Weibull parameters of random failures of the bank and fan (years at
// stress 1) and of their thermal life thresholds (in life used).
const (
	capBeta, capEtaY     = 2.6, 20.0
	fanBeta, fanEtaY     = 1.8, 22.0
	capThetaBeta, capEta = 4.0, 1.05
	// fanThetaEta puts 10 % of fans below life used 1 (the L10 definition)
	// for shape 2: η = (−ln 0.9)^(−1/2) ≈ 3.08.
	fanThetaBeta, fanThetaEta = 2.0, 3.08
)

// weibullAfter draws a Weibull(beta, eta) variate conditional on exceeding
// given (inverse transform of the conditional survival function).
func weibullAfter(rng *rand.Rand, beta, eta, given float64) float64 {
	e := -math.Log(1 - rng.Float64())
	return eta * math.Pow(math.Pow(given/eta, beta)+e, 1/beta)
}

// simDrive is a physical unit during the simulation.
type simDrive struct {
	serial string
	spec   *modelSpec
	made   time.Time
	status health.DriveStatus
	pos    *posPlan
	// reserved is set while a spare is on its way to a position.
	reserved bool
	// since is the time up to which ages and life have been accrued.
	since time.Time
	// available is when a unit in stores can be taken.
	available     time.Time
	lastEnergised time.Time
	everInstalled bool
	shelved       bool // planted storage case: not seen by the stores
	noFail        bool // planted capacitor case: kept in service
	noCapPM       bool
	notes         string

	capD, fanD, capEq, fanEq      float64
	capTau, fanTau                float64
	capTheta, fanTheta            float64
	modeEq, modeTau               [nModes]float64
	runH, onH                     float64
	capAt, fanAt                  time.Time
	capRow, fanRow, instRow       int
	pmCapAt, pmFanAt, fanRepairAt time.Time
	stint                         *stint
	hsF, airF                     float64
	lastRemoved                   time.Time
	finalSite                     string
}

// pendingInstall is a spare on its way to a position.
type pendingInstall struct {
	d  *simDrive
	at time.Time
}

// repairJob is a failed unit in the workshop.
type repairJob struct {
	d    *simDrive
	done time.Time
	mode health.FailureMode
}

type sim struct {
	s       *Scenario
	rng     *rand.Rand
	drives  []*simDrive
	atPos   []*simDrive
	pending []*pendingInstall
	repairs []repairJob
	stints  [][]*stint
	seq     map[string]int
	protect time.Time
	regen   []time.Time // planted over-voltage trips of the regenerating centrifuge
	modes   []unitMode
}

// simulate runs the history with the given random stream and fills the
// scenario's installations, components, events, drives and each position's
// stays and stops.
func simulate(s *Scenario, rng *rand.Rand) {
	m := &sim{s: s, rng: rng, atPos: make([]*simDrive, len(s.plans)), pending: make([]*pendingInstall, len(s.plans)),
		stints: make([][]*stint, len(s.plans)), seq: map[string]int{}, modes: unitModes(),
		protect: s.Now.Add(-400 * 24 * time.Hour)}
	m.initialFleet()
	m.regen = m.regenTrips()
	for day := s.HistoryStart; day.Before(s.Now); day = day.Add(24 * time.Hour) {
		end := day.Add(24 * time.Hour)
		if end.After(s.Now) {
			end = s.Now
		}
		if day.Equal(s.ReadingsStart) {
			m.openReadingYear()
		}
		m.finishRepairs(end)
		for _, p := range s.plans {
			m.runPosition(p, end)
		}
		m.trips(day, end)
	}
	for _, p := range s.plans {
		if d := m.atPos[p.idx]; d != nil {
			m.accrue(d, s.Now)
		}
	}
	m.finish()
}

// newDrive makes a unit of the model, made at the given time.
func (m *sim) newDrive(spec *modelSpec, made time.Time) *simDrive {
	n := m.seq[spec.prefix]
	if n == 0 {
		n = 100 + m.rng.IntN(300)
	}
	n += 1 + m.rng.IntN(40)
	m.seq[spec.prefix] = n
	y, w := made.ISOWeek()
	d := &simDrive{
		serial: fmt.Sprintf(serialFormat, spec.prefix, y%100, w, n), spec: spec, made: made,
		status: health.StatusInStores, since: made, available: made, lastEnergised: made,
		capAt: made, fanAt: made, capRow: -1, fanRow: -1, instRow: -1,
		hsF: 0.95 + 0.1*m.rng.Float64(), airF: 0.96 + 0.08*m.rng.Float64(),
	}
	d.capTau = weibullAfter(m.rng, capBeta, capEtaY*hoursPerYearMean, 0)
	d.fanTau = weibullAfter(m.rng, fanBeta, fanEtaY*hoursPerYearMean, 0)
	d.capTheta = weibullAfter(m.rng, capThetaBeta, capEta, 0)
	d.fanTheta = weibullAfter(m.rng, fanThetaBeta, fanThetaEta, 0)
	for i, um := range m.modes {
		d.modeTau[i] = weibullAfter(m.rng, um.beta, um.etaY*hoursPerYearMean, 0)
	}
	m.drives = append(m.drives, d)
	return d
}

// Stresses: how hard a position works each part, as a multiplier of age.

func capStress(p *posPlan) float64 {
	s := clamp(math.Exp2((p.prof.coreC-40)/20), 0.8, 2.5)
	if p.row.SupplyPhases == 1 {
		s *= 1.6
	}
	if site := p.area.site.row.Name; site == siteLift || site == siteBoosters {
		s *= 1.15 // storms on the coastal network
	}
	return s
}

func fanStress(p *posPlan) float64 {
	e := p.area.row.Environment
	s := clamp(math.Exp2((p.prof.airC-40)/20), 0.8, 2.5)
	switch e.Dust {
	case health.DustWindblown:
		s *= 1.5
	case health.DustSettling:
		s *= 1.15
	}
	if e.SaltAir {
		s *= 1.2
	}
	if e.Condensation {
		s *= 1.1
	}
	return s
}

func (m *sim) modeStress(p *posPlan, i int) float64 {
	e := p.area.row.Environment
	spec := p.model.row
	switch m.modes[i].mode {
	case health.FailurePowerModule:
		s := 1.0
		if p.row.Duty == health.DutyHeavy {
			s *= 1.5
		}
		if p.plantRegen {
			s *= 2.5
		}
		if p.row.SupplyPhases == 1 {
			s *= 1.2
		}
		if p.prof.airC > 45 {
			s *= 1.3
		}
		return s
	case health.FailureRectifier, health.FailureSoftCharge:
		s := 1.0
		if p.row.SupplyPhases == 1 {
			s *= 3
		}
		if site := p.area.site.row.Name; site == siteLift || site == siteBoosters {
			s *= 1.5
		}
		return s
	case health.FailureControlBoard:
		s := 1.0
		if !spec.ConformalCoating {
			s *= []float64{1, 1, 2, 5, 12}[e.Corrosion.Rank()]
		} else if e.Corrosion == health.CorrosionGX {
			s *= 2.5
		}
		if e.Condensation {
			s *= 1.3
		}
		if e.SaltAir {
			s *= 1.2
		}
		if e.Water == health.WaterHoseDown && spec.Enclosure.NEMAType == "" {
			s *= 30 // an open chassis in the hose-down hall
		}
		return math.Min(s, 12)
	case health.FailurePowerSupply:
		if p.prof.airC > 45 {
			return 2
		}
	case health.FailureConnections:
		switch p.shape {
		case shapeCentrifuge:
			return 3
		case shapeConveyor:
			return 2
		}
		if e.Water == health.WaterHoseDown {
			return 1.5
		}
	}
	return 1
}

func clamp(x, lo, hi float64) float64 { return math.Max(lo, math.Min(hi, x)) }

func hoursBetween(a, b time.Time) float64 { return b.Sub(a).Hours() }

func addHours(t time.Time, h float64) time.Time {
	return t.Add(time.Duration(h * float64(time.Hour))).Truncate(time.Minute)
}

// initialFleet puts a unit at every position at HistoryStart, and spares in
// the stores.
func (m *sim) initialFleet() {
	s := m.s
	for _, p := range s.plans {
		var at time.Time
		if p.plantHotKiosk {
			at = plantKioskInstall(s.Now, p.prof)
		} else {
			ageY := 0.2 + 8.3*m.rng.Float64()
			at = addHours(s.HistoryStart, -ageY*hoursPerYearMean)
		}
		d := m.newDrive(p.model, at.Add(-time.Duration(20+m.rng.IntN(100))*24*time.Hour))
		d.since = at
		if p.plantHotKiosk {
			d.noFail, d.noCapPM = true, true
			// The planted unit runs exactly as the position's profile, so
			// the life the readings show matches the arithmetic in
			// plantKioskInstall.
			d.hsF, d.airF = 1, 1
		}
		m.install(d, p, at)
		// Age the unit to HistoryStart: the parts it has had replaced by
		// plan since it was installed show as component rows before
		// HistoryStart; only the latest of each kind is listed.
		h := hoursBetween(at, s.HistoryStart)
		d.onH, d.runH = h+24, h*p.prof.runShare
		capD := h * p.prof.capPerH
		if capD >= capacitorPMAt && !d.noCapPM {
			k := math.Floor(capD / capacitorPMAt)
			t := m.beforeHistory(m.workTime(addHours(at, k*capacitorPMAt/p.prof.capPerH)))
			m.fitComponent(d, health.ComponentCapacitors, t, noteCapPreventive, nil)
			capD = hoursBetween(t, s.HistoryStart) * p.prof.capPerH
		}
		fanD := h * p.prof.fanPerH
		if fanD >= fanPMAt {
			k := math.Floor(fanD / fanPMAt)
			t := m.beforeHistory(m.workTime(addHours(at, k*fanPMAt/p.prof.fanPerH)))
			m.fitComponent(d, health.ComponentFan, t, noteFanPreventive, nil)
			fanD = hoursBetween(t, s.HistoryStart) * p.prof.fanPerH
		}
		d.capD, d.fanD = capD, fanD
		d.capEq = hoursBetween(d.capAt, s.HistoryStart) * capStress(p)
		d.fanEq = hoursBetween(d.fanAt, s.HistoryStart) * fanStress(p)
		d.capTau = weibullAfter(m.rng, capBeta, capEtaY*hoursPerYearMean, d.capEq)
		d.fanTau = weibullAfter(m.rng, fanBeta, fanEtaY*hoursPerYearMean, d.fanEq)
		d.capTheta = weibullAfter(m.rng, capThetaBeta, capEta, d.capD)
		d.fanTheta = weibullAfter(m.rng, fanThetaBeta, fanThetaEta, d.fanD)
		for i, um := range m.modes {
			d.modeEq[i] = h * m.modeStress(p, i)
			d.modeTau[i] = weibullAfter(m.rng, um.beta, um.etaY*hoursPerYearMean, d.modeEq[i])
		}
		d.since = s.HistoryStart
	}
	for _, name := range []string{modelKV11, modelKV11, modelKV11X, modelKV45, modelKV45X, modelKV110, modelTQ7} {
		spec := m.specNamed(name)
		made := addHours(s.HistoryStart, -(0.1+1.4*m.rng.Float64())*hoursPerYearMean)
		d := m.newDrive(spec, made)
		d.available = s.HistoryStart.Add(-time.Duration(m.rng.IntN(30)) * 24 * time.Hour)
		d.lastEnergised = d.available
	}
	// The planted storage case: a spare bought a little over three years
	// ago, tested on delivery and shelved where the energising rounds never
	// found it.
	spec := m.specNamed(modelKV45)
	d := m.newDrive(spec, addHours(s.Now, -3.2*hoursPerYearMean))
	d.available = addHours(s.Now, -2.65*hoursPerYearMean)
	d.lastEnergised, d.shelved, d.notes = d.available, true, noteDriveShelved
}

// beforeHistory keeps a planned job that ages a unit to HistoryStart before
// HistoryStart.
func (m *sim) beforeHistory(t time.Time) time.Time {
	if t.Before(m.s.HistoryStart) {
		return t
	}
	return m.s.HistoryStart.Add(-24 * time.Hour)
}

func (m *sim) specNamed(name string) *modelSpec {
	for _, p := range m.s.plans {
		if p.model.row.Name == name {
			return p.model
		}
	}
	panic("demo: no position uses model " + name) // a programming error, caught by the tests
}

// install opens a stay of d at p.
func (m *sim) install(d *simDrive, p *posPlan, at time.Time) {
	d.pos, d.status, d.reserved, d.everInstalled = p, health.StatusInstalled, false, true
	d.since = at
	m.atPos[p.idx] = d
	d.instRow = len(m.s.Installations)
	m.s.Installations = append(m.s.Installations, Installation{Serial: d.serial, Site: p.area.site.row.Name, Position: p.row.Tag, InstalledAt: at})
	if !at.Before(m.s.ReadingsStart) {
		m.openStint(d, p, at)
	}
}

// openStint records the unit's state as its stay in the reading year
// begins.
func (m *sim) openStint(d *simDrive, p *posPlan, at time.Time) {
	st := &stint{serial: d.serial, from: at, to: m.s.Now, capD0: d.capD, fanD0: d.fanD, runH0: d.runH, onH0: d.onH,
		bankAgeH0: hoursBetween(d.capAt, at), hsFactor: d.hsF, airFactor: d.airF}
	d.stint = st
	m.stints[p.idx] = append(m.stints[p.idx], st)
}

func (m *sim) openReadingYear() {
	for _, p := range m.s.plans {
		if d := m.atPos[p.idx]; d != nil {
			m.accrue(d, m.s.ReadingsStart)
			st := &stint{serial: d.serial, from: m.s.Installations[d.instRow].InstalledAt, to: m.s.Now,
				capD0: d.capD, fanD0: d.fanD, runH0: d.runH, onH0: d.onH,
				bankAgeH0: hoursBetween(d.capAt, m.s.ReadingsStart), hsFactor: d.hsF, airFactor: d.airF}
			d.stint = st
			m.stints[p.idx] = append(m.stints[p.idx], st)
		}
	}
}

// accrue ages the unit standing at its position up to t.
func (m *sim) accrue(d *simDrive, t time.Time) {
	p := d.pos
	dt := hoursBetween(d.since, t)
	if dt <= 0 || p == nil {
		return
	}
	d.capD += dt * p.prof.capPerH
	d.fanD += dt * p.prof.fanPerH
	d.capEq += dt * capStress(p)
	d.fanEq += dt * fanStress(p)
	for i := range m.modes {
		d.modeEq[i] += dt * m.modeStress(p, i)
	}
	d.onH += dt
	d.runH += dt * p.prof.runShare
	d.since = t
}

// event kinds of a unit in service.
const (
	evNone = iota
	evCapFail
	evFanFail
	evModeFail // + mode index
)

const (
	evCapPM = 100 + iota
	evFanPM
	evCapPMDue
	evFanPMDue
	evFanRepair
)

// nextEvent returns the next thing to happen to the unit at its position.
func (m *sim) nextEvent(d *simDrive) (time.Time, int) {
	p := d.pos
	best, kind := math.Inf(1), evNone
	consider := func(h float64, k int) {
		if h >= 0 && h < best {
			best, kind = h, k
		}
	}
	// No unit fails in the last three days (its swap would not be done by
	// Now), nor at a planted position in the last 400 days.
	cutoff := m.s.Now.Add(-72 * time.Hour)
	if p.isPlanted {
		cutoff = m.protect
	}
	failing := !d.noFail && d.since.Before(cutoff)
	if failing {
		consider((d.capTau-d.capEq)/capStress(p), evCapFail)
		consider((d.capTheta-d.capD)/p.prof.capPerH, evCapFail)
		if d.fanRepairAt.IsZero() {
			consider((d.fanTau-d.fanEq)/fanStress(p), evFanFail)
			consider((d.fanTheta-d.fanD)/p.prof.fanPerH, evFanFail)
		}
		for i := range m.modes {
			consider((d.modeTau[i]-d.modeEq[i])/m.modeStress(p, i), evModeFail+i)
		}
	}
	at := addHours(d.since, best)
	if math.IsInf(best, 1) {
		at = m.s.Now.Add(24 * time.Hour)
	}
	// A failure the cutoff would hide is pushed past it.
	if failing && !at.Before(cutoff) {
		at, kind = cutoff, evNone
	}
	planned := func(due time.Time, k int) {
		if !due.IsZero() && due.Before(at) {
			at, kind = due, k
		}
	}
	if d.pmCapAt.IsZero() && !d.noCapPM {
		planned(addHours(d.since, math.Max(0, (capacitorPMAt-d.capD)/p.prof.capPerH)), evCapPMDue)
	}
	if d.pmFanAt.IsZero() && d.fanRepairAt.IsZero() {
		planned(addHours(d.since, math.Max(0, (fanPMAt-d.fanD)/p.prof.fanPerH)), evFanPMDue)
	}
	planned(d.pmCapAt, evCapPM)
	planned(d.pmFanAt, evFanPM)
	planned(d.fanRepairAt, evFanRepair)
	return at, kind
}

// workTime returns the next planned-work slot at or after t: 07:00 to
// 11:00 UTC (09:00 to 13:00 local) on a weekday.
func (m *sim) workTime(t time.Time) time.Time {
	day := t.Truncate(24 * time.Hour)
	for {
		slot := day.Add(7*time.Hour + time.Duration(m.rng.IntN(240))*time.Minute)
		wd := day.Weekday()
		if wd != time.Saturday && wd != time.Sunday && !slot.Before(t) {
			return slot
		}
		day = day.Add(24 * time.Hour)
	}
}

// runPosition plays the position forward to end.
func (m *sim) runPosition(p *posPlan, end time.Time) {
	for {
		d := m.atPos[p.idx]
		if d == nil {
			pi := m.pending[p.idx]
			if pi == nil || !pi.at.Before(end) {
				return
			}
			m.pending[p.idx] = nil
			m.install(pi.d, p, pi.at)
			continue
		}
		at, kind := m.nextEvent(d)
		if !at.Before(end) {
			m.accrue(d, end)
			return
		}
		m.accrue(d, at)
		m.handle(d, p, at, kind)
	}
}

func (m *sim) handle(d *simDrive, p *posPlan, at time.Time, kind int) {
	switch kind {
	case evNone:
	case evCapPMDue:
		d.pmCapAt = m.workTime(at)
	case evFanPMDue:
		d.pmFanAt = m.workTime(at)
	case evCapPM:
		d.pmCapAt = time.Time{}
		m.fitComponent(d, health.ComponentCapacitors, at, noteCapPreventive, p)
	case evFanPM:
		d.pmFanAt = time.Time{}
		m.fitComponent(d, health.ComponentFan, at, noteFanPreventive, p)
	case evFanRepair:
		d.fanRepairAt = time.Time{}
		m.fitComponent(d, health.ComponentFan, at, noteFanRepair, p)
	case evFanFail:
		m.failure(d, p, at, health.FailureFan)
		m.trip(d, p, at.Add(2*time.Minute), health.TripOverTemperature, health.StateSteady, noteFanFailed)
		d.fanRepairAt = addHours(at, 3+17*m.rng.Float64())
		d.pmFanAt = time.Time{}
		m.addStop(p, at, d.fanRepairAt, false)
	case evCapFail:
		m.failure(d, p, at, health.FailureCapacitors)
		m.swap(d, p, at, health.FailureCapacitors)
	default:
		mode := m.modes[kind-evModeFail].mode
		m.failure(d, p, at, mode)
		switch mode {
		case health.FailurePowerModule:
			m.trip(d, p, at, health.TripOverCurrent, health.StateAccelerating, "")
		case health.FailureConnections:
			m.trip(d, p, at, health.TripGroundFault, health.StateSteady, "")
		}
		m.swap(d, p, at, mode)
	}
}

// fitComponent fits a new part of the kind to d at t; p is the position
// where it is done (nil in the workshop).
func (m *sim) fitComponent(d *simDrive, kind health.ComponentKind, t time.Time, note string, p *posPlan) {
	if t.After(m.s.Now) {
		return
	}
	c := store.Component{Kind: kind, InstalledAt: t, Notes: note}
	if kind == health.ComponentCapacitors {
		c.Part = fmt.Sprintf(partCapacitorFormat, d.spec.prefix, d.spec.size)
		// Each kit's capacitance and ESR differ a little from the nominal.
		c.InitialCapacitanceUF = round(d.spec.bankUF*(1+0.03*(m.rng.Float64()-0.3)), 0)
		c.InitialESRMilliohm = round(d.spec.bankESR*(1+0.08*(m.rng.Float64()-0.5)), 1)
		if d.capRow >= 0 {
			m.s.Components[d.capRow].RemovedAt = &t
		}
		d.capRow = len(m.s.Components)
		d.capAt, d.capD, d.capEq = t, 0, 0
		d.capTau = weibullAfter(m.rng, capBeta, capEtaY*hoursPerYearMean, 0)
		d.capTheta = weibullAfter(m.rng, capThetaBeta, capEta, 0)
	} else {
		c.Part = fmt.Sprintf(partFanFormat, d.spec.prefix, d.spec.size)
		if d.fanRow >= 0 {
			m.s.Components[d.fanRow].RemovedAt = &t
		}
		d.fanRow = len(m.s.Components)
		d.fanAt, d.fanD, d.fanEq = t, 0, 0
		d.fanTau = weibullAfter(m.rng, fanBeta, fanEtaY*hoursPerYearMean, 0)
		d.fanTheta = weibullAfter(m.rng, fanThetaBeta, fanThetaEta, 0)
	}
	m.s.Components = append(m.s.Components, Component{Serial: d.serial, Component: c})
	if t.Before(m.s.HistoryStart) {
		return // history before the window keeps only the part itself
	}
	e := Event{Serial: d.serial, Event: store.Event{At: t, Type: health.EventComponentReplaced, Component: kind, Notes: note}}
	if p != nil {
		e.Site, e.Position = p.area.site.row.Name, p.row.Tag
		if d.stint != nil && !t.Before(m.s.ReadingsStart) {
			d.stint.resets = append(d.stint.resets, reset{at: t, kind: kind})
		}
	}
	m.s.Events = append(m.s.Events, e)
}

// failure writes a failure event.
func (m *sim) failure(d *simDrive, p *posPlan, at time.Time, mode health.FailureMode) {
	states := []health.OperatingState{health.StateSteady, health.StateSteady, health.StateSteady, health.StateAccelerating, health.StateStopped}
	e := Event{Serial: d.serial, Site: p.area.site.row.Name, Position: p.row.Tag, Event: store.Event{
		At: at, Type: health.EventFailure, State: states[m.rng.IntN(len(states))],
		FailureMode: mode, FailureCause: m.causeOf(d, p, mode),
	}}
	m.s.Events = append(m.s.Events, e)
}

// causeOf names the likely cause of a failure from where it happened.
func (m *sim) causeOf(d *simDrive, p *posPlan, mode health.FailureMode) health.FailureCause {
	e := p.area.row.Environment
	u := m.rng.Float64()
	switch mode {
	case health.FailureCapacitors:
		switch {
		case p.row.SupplyPhases == 1 || (p.area.site.row.Name == siteLift && u < 0.4):
			return health.CauseSupply
		case p.prof.coreC > 50:
			return health.CauseHeat
		case u < 0.6:
			return health.CauseWearOut
		}
		return health.CauseUnknown
	case health.FailureFan:
		switch {
		case e.Dust == health.DustWindblown || (e.Dust == health.DustSettling && u < 0.5):
			return health.CauseContamination
		case e.SaltAir && u < 0.3:
			return health.CauseCorrosion
		case p.prof.airC > 45:
			return health.CauseHeat
		}
		return health.CauseWearOut
	case health.FailureControlBoard:
		switch {
		case e.Water == health.WaterHoseDown && d.spec.row.Enclosure.NEMAType == "":
			return health.CauseMoisture
		case e.Corrosion.Rank() >= health.CorrosionG2.Rank() && (!d.spec.row.ConformalCoating || e.Corrosion == health.CorrosionGX):
			return health.CauseCorrosion
		case e.Condensation && u < 0.4:
			return health.CauseMoisture
		}
		return health.CauseUnknown
	case health.FailurePowerModule:
		switch {
		case p.plantRegen:
			return health.CauseRegeneration
		case p.row.Duty == health.DutyHeavy:
			return health.CauseOverload
		case p.prof.airC > 45:
			return health.CauseHeat
		}
		return health.CauseUnknown
	case health.FailureRectifier, health.FailureSoftCharge:
		if u < 0.7 {
			return health.CauseSupply
		}
		return health.CauseWearOut
	case health.FailurePowerSupply:
		if p.prof.airC > 45 {
			return health.CauseHeat
		}
		return health.CauseWearOut
	case health.FailureConnections:
		if u < 0.4 {
			return health.CauseInstallation
		}
		return health.CauseWearOut
	}
	return health.CauseUnknown
}

// trip writes a trip event and, in the reading year, the stop it causes.
func (m *sim) trip(d *simDrive, p *posPlan, at time.Time, cause health.TripCause, state health.OperatingState, note string) {
	if note == "" {
		note = noteTripReset
	}
	m.s.Events = append(m.s.Events, Event{Serial: d.serial, Site: p.area.site.row.Name, Position: p.row.Tag,
		Event: store.Event{At: at, Type: health.EventTrip, TripCause: cause, State: state, Notes: note}})
}

func (m *sim) addStop(p *posPlan, from, to time.Time, decel bool) {
	if to.Before(m.s.ReadingsStart) {
		return
	}
	p.stops = append(p.stops, stop{from: from, to: to, decel: decel})
}

// swap takes the failed unit out, sends it to the workshop (or the scrap
// heap) and brings a spare.
func (m *sim) swap(d *simDrive, p *posPlan, at time.Time, mode health.FailureMode) {
	s := m.s
	out := addHours(at, 0.5+3.5*m.rng.Float64())
	if out.After(s.Now) {
		out = s.Now
	}
	status := health.StatusInRepair
	ageY := hoursBetween(d.made, at) / hoursPerYearMean
	scrap := map[health.FailureMode]float64{health.FailureControlBoard: 0.3, health.FailurePowerModule: 0.25, health.FailureRectifier: 0.1}[mode]
	if scrap == 0 {
		scrap = 0.05
	}
	if ageY > 15 || m.rng.Float64() < scrap {
		status = health.StatusRetired
	}
	if d.stint != nil {
		d.stint.deadFrom = at
	}
	m.remove(d, p, out, status)
	if status == health.StatusInRepair {
		m.repairs = append(m.repairs, repairJob{d: d, done: addHours(at, (20+40*m.rng.Float64())*24), mode: mode})
	}

	// A spare of the same model from the stores, the one waiting longest.
	var spare *simDrive
	for _, c := range m.drives {
		if c.spec == p.model && c.status == health.StatusInStores && !c.reserved && !c.shelved && !c.available.After(out) {
			if spare == nil || c.available.Before(spare.available) {
				spare = c
			}
		}
	}
	note := noteFailureSwap
	in := addHours(out, 0.4+2.6*m.rng.Float64())
	if spare == nil {
		spare = m.newDrive(p.model, addHours(at, -(20+180*m.rng.Float64())*24))
		spare.available = out
		in = addHours(out, 20+40*m.rng.Float64())
		note = noteFailureNoSpare
	}
	spare.reserved = true
	m.pending[p.idx] = &pendingInstall{d: spare, at: in}
	m.noteFailure(d, at, note)

	// Keep a spare of the model on the shelf: order one if none is there
	// or coming back from repair within two months.
	for _, c := range m.drives {
		if c.spec == p.model && !c.reserved && !c.shelved && c.status == health.StatusInStores {
			return
		}
	}
	for _, r := range m.repairs {
		if r.d.spec == p.model && r.done.Before(at.Add(60*24*time.Hour)) {
			return
		}
	}
	arrive := addHours(at, p.model.row.LeadTimeDays*(0.9+0.3*m.rng.Float64())*24)
	if arrive.After(s.Now) {
		return
	}
	n := m.newDrive(p.model, addHours(arrive, -(10+80*m.rng.Float64())*24))
	n.available, n.lastEnergised = arrive, arrive
}

// noteFailure annotates the failure event just written with the swap note.
func (m *sim) noteFailure(d *simDrive, at time.Time, note string) {
	for i := len(m.s.Events) - 1; i >= 0; i-- {
		e := &m.s.Events[i]
		if e.Serial == d.serial && e.Type == health.EventFailure && e.At.Equal(at) {
			e.Notes = note
			return
		}
	}
}

// remove closes the unit's stay at p.
func (m *sim) remove(d *simDrive, p *posPlan, at time.Time, status health.DriveStatus) {
	m.accrue(d, at)
	in := &m.s.Installations[d.instRow]
	t := at
	in.RemovedAt, in.StatusAfter = &t, status
	if d.stint != nil {
		d.stint.to = at
		d.stint = nil
	}
	d.pos, d.status, d.lastEnergised, d.lastRemoved, d.finalSite = nil, status, at, at, p.area.site.row.Name
	d.pmCapAt, d.pmFanAt, d.fanRepairAt = time.Time{}, time.Time{}, time.Time{}
	m.atPos[p.idx] = nil
}

// finishRepairs returns repaired units to the stores.
func (m *sim) finishRepairs(end time.Time) {
	keep := m.repairs[:0]
	for _, r := range m.repairs {
		if !r.done.Before(end) || r.done.After(m.s.Now) {
			keep = append(keep, r)
			continue
		}
		d := r.d
		switch r.mode {
		case health.FailureCapacitors:
			m.fitComponent(d, health.ComponentCapacitors, r.done, noteCapRepair, nil)
		default:
			for i, um := range m.modes {
				if um.mode == r.mode {
					d.modeEq[i] = 0
					d.modeTau[i] = weibullAfter(m.rng, um.beta, um.etaY*hoursPerYearMean, 0)
				}
			}
		}
		d.status = health.StatusInStores
		d.available = r.done.Add(time.Duration(1+m.rng.IntN(5)) * 24 * time.Hour)
		d.lastEnergised = r.done
	}
	m.repairs = keep
}

// tripRates returns the expected trips per year of a position by cause.
func tripRates(p *posPlan) map[health.TripCause]float64 {
	r := map[health.TripCause]float64{health.TripUnderVoltage: 0.3, health.TripPhaseLoss: 0.1,
		health.TripOverCurrent: 0.15, health.TripOther: 0.1}
	site := p.area.site.row.Name
	if site == siteLift || site == siteBoosters {
		r[health.TripUnderVoltage] += 0.4
	}
	switch p.area.row.Name {
	case areaKiosksSun:
		r[health.TripOverTemperature] = 3
	case areaKiosksShade:
		r[health.TripOverTemperature] = 0.8
	case areaHighLift:
		r[health.TripOverTemperature] = 0.4
	case areaLiftPanels:
		r[health.TripGroundFault] = 0.2
	case areaDewatering, areaIntakeDeck:
		r[health.TripGroundFault] = 0.25
	}
	if p.cabinet == cabinetSealedSun {
		r[health.TripOverTemperature] = 4
	}
	switch p.shape {
	case shapeConveyor:
		r[health.TripOverload] = 1.0
	case shapeLift:
		r[health.TripOverload] = 0.6
	case shapeFeed:
		r[health.TripOverload] = 0.5
	case shapeCentrifuge:
		r[health.TripOverload] = 0.3
	}
	return r
}

// trips draws the day's trips at every position.
func (m *sim) trips(day, end time.Time) {
	s := m.s
	doy := float64(day.YearDay())
	summer := season(doy)
	for _, p := range s.plans {
		rates := tripRates(p)
		for _, cause := range health.TripCauses() {
			rate := rates[cause]
			if cause == health.TripOverTemperature {
				rate *= math.Max(0, summer) * 2.5 // hot afternoons only
			}
			u := m.rng.Float64()
			if rate == 0 || u >= rate/365 {
				continue
			}
			at := day.Add(time.Duration(m.rng.IntN(24*60)) * time.Minute)
			state := health.StateSteady
			note := noteTripReset
			switch cause {
			case health.TripOverTemperature:
				// Hot afternoons: 14:00 to 17:00 local.
				at = day.Truncate(24 * time.Hour).Add(12*time.Hour + time.Duration(m.rng.IntN(180))*time.Minute)
				if at.Before(day) {
					at = at.Add(24 * time.Hour)
				}
				note = noteTripHot
			case health.TripOverload:
				if m.rng.IntN(2) == 0 {
					state = health.StateAccelerating
				}
				// Keep the last 45 days free of overload trips: none is
				// planted (derating.overload_trips counts 30 days).
				if at.After(s.Now.Add(-45 * 24 * time.Hour)) {
					continue
				}
			}
			m.tripIfRunning(p, at, cause, state, note, false)
		}
	}
	for len(m.regen) > 0 && m.regen[0].Before(end) {
		at := m.regen[0]
		m.regen = m.regen[1:]
		for _, p := range s.plans {
			if p.plantRegen {
				m.tripIfRunning(p, at, health.TripOverVoltage, health.StateDecelerating, noteTripDecel, true)
			}
		}
	}
}

// tripIfRunning writes a trip when a healthy unit stands at p at that time.
func (m *sim) tripIfRunning(p *posPlan, at time.Time, cause health.TripCause, state health.OperatingState, note string, decel bool) {
	d := m.atPos[p.idx]
	if d == nil || at.After(m.s.Now) || !d.fanRepairAt.IsZero() {
		return // no unit there, or one already stopped by a failed fan
	}
	if in := m.s.Installations[d.instRow].InstalledAt; at.Before(in) {
		return // the unit came later that day
	}
	m.trip(d, p, at, cause, state, note)
	m.addStop(p, at, addHours(at, 0.7+2.3*m.rng.Float64()), decel)
}

// regenTrips returns the planted over-voltage trips of the regenerating
// centrifuge: since its deceleration ramp was shortened 430 days before
// Now, about one batch in fourteen ends in a trip while the bowl slows down,
// and at least three fall in the last 90 days (the DC-bus rule's window).
func (m *sim) regenTrips() []time.Time {
	s := m.s
	var j int
	found := false
	for _, p := range s.plans {
		if p.plantRegen {
			j, found = p.rank, true
		}
	}
	if !found {
		return nil
	}
	r := rand.New(rand.NewPCG(mix(s.Seed, 0x726567656e), 1))
	var out, recent []time.Time
	from := s.Now.Add(-430 * 24 * time.Hour)
	window := s.Now.Add(-85 * 24 * time.Hour)
	var candidates []time.Time
	for d := localDay(from); d < localDay(s.Now); d++ {
		cd := centrifugeSchedule(s.Seed, j, d)
		if !cd.runs {
			continue
		}
		at := time.Unix(d*86400, 0).UTC().Add(time.Duration(cd.end)*time.Hour - localOffset).
			Add(time.Duration(5+r.IntN(20)) * time.Minute)
		if !at.After(from) || at.After(s.Now) {
			continue
		}
		if at.After(window) {
			candidates = append(candidates, at)
		}
		if r.Float64() < 0.07 {
			out = append(out, at)
			if at.After(window) {
				recent = append(recent, at)
			}
		}
	}
	for i := len(candidates) - 1; i >= 0 && len(recent) < 3; i -= 7 {
		if !slices.Contains(out, candidates[i]) {
			out = append(out, candidates[i])
			recent = append(recent, candidates[i])
		}
	}
	slices.SortFunc(out, func(a, b time.Time) int { return a.Compare(b) })
	return out
}

// finish settles the units' final state and writes the drive rows.
func (m *sim) finish() {
	s := m.s
	for i := range m.atPos {
		p := s.plans[i]
		p.stints = nil
		for _, st := range m.stints[i] {
			p.stints = append(p.stints, *st)
		}
		slices.SortFunc(p.stops, func(a, b stop) int { return a.from.Compare(b.from) })
	}
	// The last energising round of the stores: mid-June and mid-December,
	// so no spare on the list goes a year unpowered (common practice is at
	// least yearly).
	round := time.Date(s.Now.Year()+1, time.June, 15, 8, 0, 0, 0, time.UTC)
	for round.After(s.Now) {
		round = round.AddDate(0, -6, 0)
	}
	spares := map[string]int{}
	for _, d := range m.drives {
		if d.status == health.StatusInStores && d.everInstalled && s.Now.Sub(d.lastRemoved) > 300*24*time.Hour {
			// Back from repair long ago and never used: scrapped (the
			// register can only say so at its last removal).
			d.status = health.StatusRetired
		}
		if d.everInstalled && d.status != health.StatusInstalled {
			// The last removal says where the unit ended up.
			for k := len(s.Installations) - 1; k >= 0; k-- {
				if s.Installations[k].Serial == d.serial {
					s.Installations[k].StatusAfter = d.status
					break
				}
			}
		}
		row := Drive{Model: d.spec.row.Name, Drive: store.Drive{Serial: d.serial, ManufacturedAt: d.made, Notes: d.notes}}
		switch {
		case d.status == health.StatusInstalled:
			row.Site = d.pos.area.site.row.Name
		case d.status == health.StatusInStores:
			row.Site, row.StoresArea, row.Status = siteWorks, areaStores, d.status
			le := d.lastEnergised
			if !d.everInstalled && !d.shelved {
				if round.After(le) {
					le = round
				}
				row.Notes = noteDriveSpareNew
			}
			row.LastEnergisedAt = &le
			spares[d.spec.row.Name]++
		default:
			row.Site, row.Status = d.finalSite, d.status
			le := d.lastEnergised
			row.LastEnergisedAt = &le
		}
		s.Drives = append(s.Drives, row)
	}
	for i := range s.Models {
		s.Models[i].SparesOnHand = spares[s.Models[i].Name]
	}
	slices.SortStableFunc(s.Installations, func(a, b Installation) int {
		return cmp.Or(a.InstalledAt.Compare(b.InstalledAt), cmp.Compare(a.Serial, b.Serial))
	})
	slices.SortStableFunc(s.Components, func(a, b Component) int {
		return cmp.Or(a.InstalledAt.Compare(b.InstalledAt), cmp.Compare(a.Serial, b.Serial), cmp.Compare(a.Kind, b.Kind))
	})
	slices.SortStableFunc(s.Events, func(a, b Event) int {
		return cmp.Or(a.At.Compare(b.At), cmp.Compare(a.Serial, b.Serial), cmp.Compare(a.Type, b.Type))
	})
}
