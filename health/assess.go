package health

import (
	"fmt"
	"math"
	"slices"
)

// DriveParams gathers the parameters of every model. DefaultDriveParams
// gives kelvard's defaults; a site, area or model may override any field.
type DriveParams struct {
	Capacitor   CapacitorParams   `json:"capacitor"`
	Fan         FanParams         `json:"fan"`
	Storage     StorageParams     `json:"storage"`
	Duty        DutyParams        `json:"duty"`
	Cabinet     CabinetParams     `json:"cabinet"`
	DCBus       DCBusParams       `json:"dc_bus"`
	DataQuality DataQualityParams `json:"data_quality"`
	Heatsink    HeatsinkParams    `json:"heatsink"`
}

// DefaultDriveParams returns every model's defaults.
func DefaultDriveParams() DriveParams {
	return DriveParams{
		Capacitor:   DefaultCapacitorParams(),
		Fan:         DefaultFanParams(),
		Storage:     DefaultStorageParams(),
		Duty:        DefaultDutyParams(),
		Cabinet:     DefaultCabinetParams(),
		DCBus:       DefaultDCBusParams(),
		DataQuality: DefaultDataQualityParams(),
		Heatsink:    DefaultHeatsinkParams(),
	}
}

// PositionInput describes where an installed drive stands.
type PositionInput struct {
	Criticality Criticality
	Environment Environment
	// Housing is the enclosure around the drive (its own, or the cabinet's)
	// and whether its boards are coated.
	Housing Housing
	// Cabinet is nil when the drive stands in its own enclosure.
	Cabinet *Cabinet
	// Application carries duty, altitude, carrier and supply; AssessDrive
	// sets its AmbientC to the design point itself.
	Application Application
	// SupplyLineV is the supply's line-to-line voltage.
	SupplyLineV float64
	// LastReadingAt is the newest reading of the position (Unix seconds);
	// HasReadings is false when it never sent one.
	LastReadingAt int64
	HasReadings   bool
}

// DriveInput is everything AssessDrive needs about one drive at one time.
type DriveInput struct {
	// At is the assessment time, Unix seconds.
	At int64
	// Position is nil for a drive in stores, in repair or retired.
	Position *PositionInput
	// LastEnergisedAt is when a stored drive was last powered (Unix
	// seconds, 0 when unknown).
	LastEnergisedAt int64

	Ratings   Ratings
	Capacitor CapacitorSpec
	Fan       FanSpec
	// CapacitorInitial holds the bank's initial capacitance and ESR when
	// known (else the first reported values serve).
	CapacitorInitial CapacitorInitial
	// CapacitorState and FanState are the accumulated lives (AccumulateCapacitor,
	// AccumulateFan, AddStoredCapacitorPeriod).
	CapacitorState CapacitorState
	FanState       FanState
	// CapacitorUnobserved and FanUnobserved are installed service that no
	// reading covers (LifeReport.WithUnobserved).
	CapacitorUnobserved Unobserved
	FanUnobserved       Unobserved

	// Window holds the trailing readings for the window checks (duty,
	// DC bus, heatsink trend, data quality, measured capacitance). Nil
	// skips those checks: their findings in Previous are carried forward,
	// and Measured stands for the capacitor measurements.
	Window []Sample
	Events []Event
	// Measured is the measured-capacitor report of the last window pass.
	Measured *CapacitorMeasuredReport
	// Previous holds the drive's current findings from the last run.
	Previous []Finding
	// Suppressed lists rule ids a planner has suppressed: they stay in the
	// findings but do not count toward risk.
	Suppressed []string

	Params DriveParams
}

// Unobserved is installed service time no reading covers, and the damage
// rate to charge it at when no rate has been observed.
type Unobserved struct {
	Hours            float64 `json:"hours"`
	FallbackRatePerH float64 `json:"fallback_rate_per_h"`
}

// DriveAssessment is the health of one drive at one time.
type DriveAssessment struct {
	At        int64                    `json:"at"`
	Capacitor CapacitorLifeReport      `json:"capacitor"`
	Measured  *CapacitorMeasuredReport `json:"capacitor_measured,omitempty"`
	Fan       FanLifeReport            `json:"fan"`
	Enclosure *EnclosureReport         `json:"enclosure,omitempty"`
	Allowance *Allowance               `json:"allowance,omitempty"`
	Duty      *DutyAssessment          `json:"duty,omitempty"`
	Cabinet   *CabinetAssessment       `json:"cabinet,omitempty"`
	DCBus     *DCBusAssessment         `json:"dc_bus,omitempty"`
	Heatsink  *HeatsinkTrendReport     `json:"heatsink,omitempty"`
	Storage   *StorageAdvice           `json:"storage,omitempty"`
	// Findings are the rules that hold now: those evaluated in this run and
	// those carried forward from Previous.
	Findings []Finding `json:"findings"`
	// Evaluated lists the rule ids whose checks ran, so a finding of one of
	// them that is not in Findings has cleared.
	Evaluated []string       `json:"evaluated"`
	Risk      RiskAssessment `json:"risk"`
}

// AssessDrive runs every model that applies to one drive and combines the
// results into findings and a risk score. It is a pure function of its
// input: the caller accumulates capacitor and fan life incrementally and
// passes the states, plus a trailing window of readings when the window
// checks are due.
//
// For an installed drive it judges the enclosure against the area
// (JudgeEnclosure), the cabinet at the design point (AssessCabinet, drive at
// its duty-class rated current), the allowed current at the design point
// (AllowedCurrent with the area's design maximum ambient, or the cabinet's
// predicted air; DeratingFindings), and, with a window, duty (AssessDuty),
// DC bus (AssessDCBus), heatsink trend (HeatsinkTrend), data quality
// (AssessDataQuality) and measured capacitance (CapacitorMeasured); silence
// (CheckSilent) runs every time. For a stored drive it gives storage advice
// (AdviseStoredDrive). For both it reports capacitor and fan life
// (CapacitorLife, FanLife) and the risk (AssessRisk). Sources and validity
// as each function named.
func AssessDrive(in DriveInput) (DriveAssessment, error) {
	p := in.Params
	out := DriveAssessment{At: in.At}
	var found []Finding
	var evaluated []string
	window := in.Window != nil

	capLife, err := CapacitorLife(in.Capacitor, p.Capacitor, in.CapacitorState, in.At)
	if err != nil {
		return out, err
	}
	capLife.LifeReport = capLife.LifeReport.WithUnobserved(in.CapacitorUnobserved.Hours, in.CapacitorUnobserved.FallbackRatePerH)
	out.Capacitor = capLife
	out.Measured = in.Measured
	if window {
		if ms := CapacitorMeasurements(in.Window); len(ms) > 0 {
			m, err := CapacitorMeasured(ms, in.CapacitorInitial, p.Capacitor)
			if err != nil {
				return out, err
			}
			out.Measured = &m
		} else {
			out.Measured = nil
		}
	}
	var meas CapacitorMeasuredReport
	if out.Measured != nil {
		meas = *out.Measured
	}
	found = append(found, CapacitorFindings(p.Capacitor, capLife, meas, in.At)...)
	evaluated = append(evaluated, rulesOf(checkCapacitor)...)

	fanLife, err := FanLife(in.Fan, p.Fan, in.FanState, in.At)
	if err != nil {
		return out, err
	}
	fanLife.LifeReport = fanLife.LifeReport.WithUnobserved(in.FanUnobserved.Hours, in.FanUnobserved.FallbackRatePerH)
	out.Fan = fanLife
	found = append(found, FanFindings(p.Fan, fanLife, in.At)...)
	evaluated = append(evaluated, rulesOf(checkFan)...)

	risk := RiskInput{CapacitorLifeUsed: capLife.LifeUsedAtAssessmentFraction, FanLifeUsed: fanLife.LifeUsedAtAssessmentFraction,
		LowestDerateFactor: math.NaN(), Criticality: CriticalityC}

	if pos := in.Position; pos != nil {
		risk.Criticality = pos.Criticality
		f, ev, err := assessPosition(&out, in, pos)
		if err != nil {
			return out, err
		}
		found = append(found, f...)
		evaluated = append(evaluated, ev...)
		if out.Allowance != nil {
			lowest := 1.0
			for _, fac := range out.Allowance.Factors {
				lowest = min(lowest, fac.Value)
				risk.OutOfRating = risk.OutOfRating || fac.OutOfRating()
			}
			risk.LowestDerateFactor = lowest
		}
	} else {
		// Nothing tied to a position applies to a stored drive, so every
		// position finding it carried clears.
		if in.LastEnergisedAt > 0 {
			adv, err := AdviseStoredDrive(in.LastEnergisedAt, in.At, p.Storage)
			if err != nil {
				return out, err
			}
			out.Storage = &adv
			found = append(found, StorageFindings(adv, p.Storage)...)
		}
		for _, g := range ruleGroups() {
			if g.check != checkCapacitor && g.check != checkFan {
				evaluated = append(evaluated, rulesOf(g.check)...)
			}
		}
	}

	found = mergeByRule(found)
	// Carry forward the findings of checks that did not run.
	for _, f := range in.Previous {
		if !slices.Contains(evaluated, f.Rule) && !slices.ContainsFunc(found, func(g Finding) bool { return g.Rule == f.Rule }) {
			found = append(found, f)
		}
	}
	slices.SortStableFunc(found, func(a, b Finding) int {
		if d := b.Severity.Rank() - a.Severity.Rank(); d != 0 {
			return d
		}
		switch {
		case a.Rule < b.Rule:
			return -1
		case a.Rule > b.Rule:
			return 1
		}
		return 0
	})
	out.Findings = found
	slices.Sort(evaluated)
	out.Evaluated = slices.Compact(evaluated)

	counted := slices.DeleteFunc(slices.Clone(found), func(f Finding) bool { return slices.Contains(in.Suppressed, f.Rule) })
	risk.Findings = CountFindings(counted)
	out.Risk = AssessRisk(risk)
	return out, nil
}

// assessPosition runs the checks that depend on where the drive stands.
func assessPosition(out *DriveAssessment, in DriveInput, pos *PositionInput) ([]Finding, []string, error) {
	p := in.Params
	var found []Finding
	var evaluated []string
	window := in.Window != nil

	enc := JudgeEnclosure(pos.Environment, pos.Housing)
	out.Enclosure = &enc
	found = append(found, enc.Findings...)
	evaluated = append(evaluated, rulesOf(checkEnclosure)...)

	app := pos.Application
	app.AmbientC = pos.Environment.AmbientMaxC
	designAmbient := pos.Environment.AmbientMaxC
	evaluated = append(evaluated, rulesOf(checkCabinet)...)
	if pos.Cabinet != nil {
		cab, err := AssessCabinet(CabinetInput{Cabinet: *pos.Cabinet, Ratings: in.Ratings, Duty: app.Duty,
			DesignAmbientMaxC: pos.Environment.AmbientMaxC}, p.Cabinet)
		if err != nil {
			return nil, nil, fmt.Errorf("cabinet: %w", err)
		}
		out.Cabinet = &cab
		found = append(found, cab.Findings...)
		// The drive's ambient is the cabinet air, judged by the cabinet
		// rules; the derating rules see it through the ambient factor.
		app.AmbientC = cab.Heat.InternalAirC
		designAmbient = math.NaN()
	}

	al, err := AllowedCurrent(in.Ratings, app)
	if err != nil {
		return nil, nil, fmt.Errorf("allowed current: %w", err)
	}
	out.Allowance = &al
	evaluated = append(evaluated, rulesOf(checkDerating, checkSilence)...)
	if !window {
		found = append(found, DeratingFindings(in.Ratings, app, al, designAmbient, p.Duty.Derating)...)
		found = append(found, CheckSilent(pos.LastReadingAt, pos.HasReadings, in.At, p.DataQuality)...)
		return found, evaluated, nil
	}

	duty, err := AssessDuty(DutyInput{Ratings: in.Ratings, Application: app, DesignAmbientMaxC: designAmbient,
		Samples: in.Window, Events: in.Events, At: in.At}, p.Duty)
	if err != nil {
		return nil, nil, fmt.Errorf("duty: %w", err)
	}
	out.Duty = &duty
	found = append(found, duty.Findings...)

	bus, err := AssessDCBus(DCBusInput{Ratings: in.Ratings, Duty: app.Duty, SupplyLineV: pos.SupplyLineV,
		Samples: in.Window, Events: in.Events, At: in.At}, p.DCBus)
	if err != nil {
		return nil, nil, fmt.Errorf("dc bus: %w", err)
	}
	out.DCBus = &bus
	found = append(found, bus.Findings...)

	// The heatsink is judged against the air around the drive: inside a
	// cabinet that is the cabinet air (logged, or the cabinet model's
	// estimate), which an air-conditioned cabinet holds at its set point
	// whatever the room does.
	hsWindow := in.Window
	if pos.Cabinet != nil {
		cm, err := NewCabinetModel(*pos.Cabinet, in.Ratings, app.Duty, p.Cabinet)
		if err != nil {
			return nil, nil, fmt.Errorf("heatsink: %w", err)
		}
		hsWindow = make([]Sample, len(in.Window))
		for i, s := range in.Window {
			s.AmbientC = cm.AirAtDriveC(s)
			hsWindow[i] = s
		}
	}
	hs, err := HeatsinkTrend(hsWindow, in.Ratings.Rated(app.Duty).RatedA, in.At, p.Heatsink)
	if err != nil {
		return nil, nil, fmt.Errorf("heatsink: %w", err)
	}
	out.Heatsink = &hs
	found = append(found, HeatsinkFindings(hs, p.Heatsink)...)

	last := int64(0)
	if pos.HasReadings {
		last = pos.LastReadingAt
	}
	dq, err := AssessDataQuality(DataQualityInput{Samples: in.Window, LastReadingAt: last, At: in.At,
		DesignAmbientMinC: pos.Environment.AmbientMinC, DesignAmbientMaxC: pos.Environment.AmbientMaxC}, p.DataQuality)
	if err != nil {
		return nil, nil, fmt.Errorf("data quality: %w", err)
	}
	found = append(found, dq...)
	evaluated = append(evaluated, rulesOf(checkDuty, checkDCBus, checkHeatsink, checkDataQuality)...)
	return found, evaluated, nil
}

// Validate reports the first unusable parameter of any model.
func (p DriveParams) Validate() error {
	for _, v := range []interface{ Validate() error }{p.Capacitor, p.Fan, p.Storage, p.Duty, p.DCBus, p.DataQuality, p.Heatsink} {
		if err := v.Validate(); err != nil {
			return err
		}
	}
	return nil
}

// mergeByRule folds findings of one rule into one (a rule holds once per
// drive): the worst severity, the messages joined, the evidence of all.
// Data-quality checks, for example, raise one finding per stuck field.
func mergeByRule(fs []Finding) []Finding {
	out := make([]Finding, 0, len(fs))
	at := map[string]int{}
	for _, f := range fs {
		i, seen := at[f.Rule]
		if !seen {
			at[f.Rule] = len(out)
			out = append(out, f)
			continue
		}
		m := &out[i]
		if f.Severity.Rank() > m.Severity.Rank() {
			m.Severity = f.Severity
		}
		m.Message += " " + f.Message
		m.Evidence = append(slices.Clone(m.Evidence), f.Evidence...)
		m.PhysicalWork = m.PhysicalWork || f.PhysicalWork
	}
	return out
}
