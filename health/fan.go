package health

import (
	"fmt"
	"math"
)

// This file holds the cooling-fan life model: L10 life halving for every
// HalvingC hotter, accumulated over the time the fan runs with the same
// incremental ledger as the capacitors (miner.go).
//
// Temperature choice: the fan's life is set by its bearing grease, which sits
// at the temperature of the air the fan moves. Drive fans draw the air inside
// the drive or cabinet across the heatsink, so the model uses the same air
// temperature as the capacitor model (internal air reading, else the caller's
// estimate, else ambient plus a rise, else the fill temperature). The
// heatsink temperature is used only to decide whether a temperature-switched
// fan is running; it is hotter than the air the bearing sees and would
// understate the life.

// FanSpec is the life rating and control of a drive's cooling fan.
type FanSpec struct {
	// L10H is the L10 life in hours (10 % of fans failed) at RefTempC,
	// for example 40 000 h at 60 °C.
	L10H     float64 `json:"l10_h"`
	RefTempC float64 `json:"ref_temp_c"`
	// HalvingC is the temperature step that halves the life, default 10;
	// 10 to 15 °C is common practice.
	HalvingC float64 `json:"halving_c"`
	// Runs says when the fan runs: FanAlways (whenever the drive is
	// powered) or FanWhenWarm (only while the heatsink, or the internal air
	// when no heatsink temperature is logged, is above SwitchOnC; while the
	// drive runs when neither is logged).
	Runs      FanRuns `json:"runs"`
	SwitchOnC float64 `json:"switch_on_c"`
}

// DefaultFanSpec returns an L10 of 40 000 h at 60 °C halving every 10 °C
// (common practice), running whenever powered; the switch-on temperature for
// temperature-controlled fans defaults to 45 °C at the heatsink (from
// memory).
func DefaultFanSpec() FanSpec {
	return FanSpec{L10H: 40000, RefTempC: 60, HalvingC: 10, Runs: FanAlways, SwitchOnC: 45}
}

// Validate reports the first unusable field.
func (s FanSpec) Validate() error {
	switch {
	case !(s.L10H > 0) || math.IsInf(s.L10H, 0):
		return fmt.Errorf("fan spec: L10 life %v h must be a positive number", s.L10H)
	case !(s.RefTempC >= -20 && s.RefTempC <= 150):
		return fmt.Errorf("fan spec: reference temperature %v °C must lie in [-20, 150]", s.RefTempC)
	case !(s.HalvingC >= 5 && s.HalvingC <= 30):
		return fmt.Errorf("fan spec: halving interval %v °C must lie in [5, 30]", s.HalvingC)
	case !s.Runs.Valid():
		return fmt.Errorf("fan spec: running mode %q must be one of %v", s.Runs, FanRunsValues())
	case !(s.SwitchOnC >= -20 && s.SwitchOnC <= 150):
		return fmt.Errorf("fan spec: switch-on temperature %v °C must lie in [-20, 150]", s.SwitchOnC)
	}
	return nil
}

// LifeH returns the fan's L10 life in hours at a constant air temperature:
//
//	L = L10 * 2^((Tref - T) / HalvingC)
//
// common practice for fan bearing-grease life (fan makers publish L10 at a
// reference temperature and a halving interval of 10 to 15 °C). Exactly
// HalvingC hotter gives exactly half the life. Valid from about 25 °C up to
// the fan's maximum rated temperature (typically 70 °C); below that the
// grease-life estimate becomes optimistic (from memory).
func (s FanSpec) LifeH(tempC float64) float64 {
	return halvingLife(s.L10H, s.RefTempC-tempC, s.HalvingC)
}

// Running reports whether the fan runs during a sample, by Runs: always for
// FanAlways; for FanWhenWarm while the heatsink (else the internal air) is
// above SwitchOnC, and while the drive runs when neither is logged.
func (s FanSpec) Running(x Sample) bool {
	return fanOn(&x, s.Runs, s.SwitchOnC)
}

func fanOn(x *Sample, runs FanRuns, switchOn float64) bool {
	if runs != FanWhenWarm {
		return true
	}
	if h := x.HeatsinkC; lifeFinite(h) {
		return h > switchOn
	}
	if a := x.InternalAirC; lifeFinite(a) {
		return a > switchOn
	}
	return x.Running()
}

// FanParams are the assumptions and thresholds of the fan model; every field
// has a default in DefaultFanParams.
type FanParams struct {
	Interval   LifeIntervalParams   `json:"interval"`
	Projection LifeProjectionParams `json:"projection"`
	// HorizonDays: a projected end of life within this many days raises
	// fan.end_of_life_near, default 365; major within MajorWithinDays,
	// default 90 (common practice).
	HorizonDays     float64 `json:"horizon_days"`
	MajorWithinDays float64 `json:"major_within_days"`
}

// DefaultFanParams returns the defaults documented on each field.
func DefaultFanParams() FanParams {
	return FanParams{
		Interval:        DefaultLifeIntervalParams(),
		Projection:      DefaultLifeProjectionParams(),
		HorizonDays:     365,
		MajorWithinDays: 90,
	}
}

// Validate reports the first unusable field.
func (p FanParams) Validate() error {
	if err := p.Interval.Validate(); err != nil {
		return fmt.Errorf("fan params: %w", err)
	}
	if err := p.Projection.Validate(); err != nil {
		return fmt.Errorf("fan params: %w", err)
	}
	if !(p.HorizonDays >= 0 && p.MajorWithinDays >= 0 && p.MajorWithinDays <= p.HorizonDays) {
		return fmt.Errorf("fan params: horizon %v and major-within %v days must satisfy 0 <= major <= horizon", p.HorizonDays, p.MajorWithinDays)
	}
	return nil
}

// FanState is the accumulated life of one cooling fan; AgingS in its ledger
// is the fan's running time.
type FanState struct {
	LifeLedger
}

// fanLaw holds the constants of the fan life law for the accumulation loop.
type fanLaw struct {
	invL10s, tref, invH float64
	tab                 exp2Table
}

func newFanLaw(s FanSpec) fanLaw {
	return fanLaw{invL10s: 1 / (s.L10H * lifeSecondsPerHour), tref: s.RefTempC, invH: 1 / s.HalvingC, tab: newExp2Table()}
}

// rateS returns damage per running second at an air temperature.
func (l *fanLaw) rateS(tempC float64) float64 {
	return l.invL10s * l.tab.exp2((tempC-l.tref)*l.invH)
}

// AccumulateFan adds a batch of readings to a fan's ledger by the
// Palmgren–Miner rule over the fan's running time,
//
//	D = D_prev + sum(on_i * dt_i / L(T_i)),
//
// with L from FanSpec.LifeH (common practice) and T_i the air temperature of
// reading i chosen as LifeAirInputs documents; on_i from FanSpec.Running. Gaps
// longer than MaxGapS and readings without an air temperature are filled at
// FillAirC with the fan running (conservative: nothing shows it stopped).
// Readings not after the ledger's last reading are skipped. The samples must
// be sorted by At. Fed in one call or in many, the result is the same.
func AccumulateFan(spec FanSpec, p FanParams, st FanState, samples []Sample, air LifeAirInputs) (FanState, AccumulationReport, error) {
	if err := spec.Validate(); err != nil {
		return st, AccumulationReport{}, fmt.Errorf("accumulate fan life: %w", err)
	}
	if err := p.Validate(); err != nil {
		return st, AccumulationReport{}, fmt.Errorf("accumulate fan life: %w", err)
	}
	law := newFanLaw(spec)
	fill := p.Interval.FillAirC
	fillRate := law.rateS(fill)
	maxGap := p.Interval.MaxGapS
	est, airRise := air.InternalC, air.RiseOverAmbientC

	led := st.LifeLedger
	c := openCursor(&led)
	d0, s0 := c.damage, c.seconds
	var rep AccumulationReport
	var src [airSources]int64
	var gapS float64
	hasLast, last := led.HasLast, led.LastAt
	for i := range samples {
		s := &samples[i]
		at := s.At
		var from int64
		if hasLast {
			if at <= last {
				rep.Skipped++
				continue
			}
			from = last
		} else {
			hasLast = true
			led.FirstAt = at
			if p.Interval.FirstIntervalS == 0 {
				last = at
				rep.Samples++
				continue
			}
			from = at - p.Interval.FirstIntervalS
		}
		rep.Samples++
		last = at
		if at-from > maxGap {
			rep.Gaps++
			gapS += float64(at - from)
			c.add(from, at, fillRate, fill, 1)
			continue
		}
		a, k := airOf(s, i, est, airRise)
		src[k]++
		switch {
		case k == airMissing:
			c.add(from, at, fillRate, fill, 1)
		case fanOn(s, spec.Runs, spec.SwitchOnC):
			c.add(from, at, law.rateS(a), a, 1)
		default:
			c.add(from, at, 0, 0, 0)
		}
	}
	rep.DamageAdded = c.damage - d0
	rep.Hours = (c.seconds - s0) / lifeSecondsPerHour
	rep.GapH = gapS / lifeSecondsPerHour
	rep.Air.addArray(&src)
	c.close(&led)
	led.HasLast, led.LastAt = hasLast, last
	led.Samples += rep.Samples
	led.Skipped += rep.Skipped
	led.Gaps += rep.Gaps
	led.GapS += gapS
	led.Air.add(rep.Air)
	return FanState{led}, rep, nil
}

// FanLifeReport is the life position of a cooling fan. LifeUsedFraction is
// relative to the L10 life: at 1 a tenth of such fans would have failed,
// the usual point to replace them (common practice).
type FanLifeReport struct {
	LifeReport
	L10H     float64 `json:"l10_h"`
	RefTempC float64 `json:"ref_temp_c"`
	HalvingC float64 `json:"halving_c"`
	Runs     FanRuns `json:"runs"`
}

// FanLife reports a fan's life position at the assessment time at (Unix
// seconds, supplied by the caller): life used D against L10, remaining
// hours (1 - D)/r at the trailing-12-month rate r per calendar hour (so the
// fan's duty is included) and at the 30-day rate, and the projected date with
// its band (Palmgren–Miner; remaining-life convention of DESIGN.md section
// 3). Valid while the future duty and temperatures resemble the trailing
// window.
func FanLife(spec FanSpec, p FanParams, st FanState, at int64) (FanLifeReport, error) {
	if err := spec.Validate(); err != nil {
		return FanLifeReport{}, fmt.Errorf("fan life: %w", err)
	}
	if err := p.Validate(); err != nil {
		return FanLifeReport{}, fmt.Errorf("fan life: %w", err)
	}
	return FanLifeReport{
		LifeReport: st.project(p.Projection, at),
		L10H:       spec.L10H,
		RefTempC:   spec.RefTempC,
		HalvingC:   spec.HalvingC,
		Runs:       spec.Runs,
	}, nil
}

// fanRules lists every rule the fan life model can raise (the heatsink trend
// rule is in heatsink.go).
var fanRules = []RuleInfo{
	{ID: "fan.end_of_life", Kind: KindFan, Title: "Cooling fan past its L10 life", Remedy: remedyFanEnd},
	{ID: "fan.end_of_life_near", Kind: KindFan, Title: "Cooling fan near its L10 life", Remedy: remedyFanNear},
}

const (
	remedyFanEnd  = "Replace the cooling fan at the next opportunity and clean the heatsink and filters while the drive is open."
	remedyFanNear = "Plan fan replacement before the projected date; combine it with filter and heatsink cleaning."
	sourceFan     = "fan L10 life halving per temperature step (common practice) and the Palmgren–Miner rule"
)

// FanFindings turns a fan life report into findings at the assessment time
// at: fan.end_of_life (major) when the L10 life is used up, fan.end_of_life_near
// when the projected date falls within HorizonDays (major within
// MajorWithinDays, else minor). A fan past L10 is major rather than critical:
// the drive protects itself by an over-temperature trip, and fans are cheap
// and quick to change (common practice). Valid for any report FanLife gives.
func FanFindings(p FanParams, life FanLifeReport, at int64) []Finding {
	ev := []Evidence{
		{Name: "life_used_fraction", Value: life.LifeUsedFraction, Limit: 1.0, Source: sourceFan},
		{Name: "mean_air_temp_c", Value: lifeNaNToNil(life.MeanTempC), Unit: "°C"},
		{Name: "running_fraction", Value: life.AgingFraction},
		{Name: "l10_h", Value: life.L10H, Unit: "h"},
		{Name: "ref_temp_c", Value: life.RefTempC, Unit: "°C"},
		{Name: "halving_c", Value: life.HalvingC, Unit: "°C", Source: "common practice"},
	}
	if life.EndReached {
		return []Finding{{PhysicalWork: true, Rule: "fan.end_of_life", Kind: KindFan, Severity: SeverityMajor,
			Message:  fmt.Sprintf("The cooling fan has run past its L10 life (%.0f %% used), reached on %s.", life.LifeUsedFraction*100, lifeDate(life.EndReachedAt)),
			Evidence: ev, Remedy: remedyFanEnd}}
	}
	if !life.Projected {
		return nil
	}
	days := float64(life.EndOfLifeAt-at) / lifeSecondsPerDay
	if days > p.HorizonDays {
		return nil
	}
	sev := SeverityMinor
	if days <= p.MajorWithinDays {
		sev = SeverityMajor
	}
	ev = append([]Evidence{
		{Name: "projected_end_of_life", Value: lifeDate(life.EndOfLifeAt), Source: sourceFan},
		{Name: "days_to_end_of_life", Value: math.Round(days*10) / 10, Unit: "d", Limit: p.HorizonDays, Source: "common practice"},
		{Name: "remaining_h", Value: life.RemainingH, Unit: "h"},
		{Name: "end_of_life_earliest", Value: lifeDate(life.EndOfLifeEarliestAt), Source: "harshest month of the trailing year"},
	}, ev...)
	return []Finding{{PhysicalWork: true, Rule: "fan.end_of_life_near", Kind: KindFan, Severity: sev,
		Message:  fanNearMessage(life, days),
		Evidence: ev, Remedy: remedyFanNear}}
}

func fanNearMessage(life FanLifeReport, days float64) string {
	if days <= 0 {
		return fmt.Sprintf("The cooling fan is projected to have reached its L10 life on %s; no reading since %s confirms it.", lifeDate(life.EndOfLifeAt), lifeDate(life.LastAt))
	}
	return fmt.Sprintf("The cooling fan is projected to reach its L10 life on %s, in %.0f days.", lifeDate(life.EndOfLifeAt), days)
}
