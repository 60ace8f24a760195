package plan

import (
	"cmp"
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// Group dimensions of the fleet statistics.
const (
	DimensionFleet       = "fleet"
	DimensionModel       = "model"
	DimensionEnvironment = "environment"
)

// ModeAny fits every failure mode together, in unit age in service.
const ModeAny = "any"

// Age bases: what the ages of a fit count (see lifedata.go).
const (
	AgeComponent = "component_age_h"
	AgeService   = "service_age_h"
)

// Reliability is the fleet's failure statistics: Weibull fits per group,
// expected failures, spares to hold per model, and a backtest of the
// capacitor life model against the capacitor failures.
type Reliability struct {
	At time.Time `json:"at"`
	// AgeDefinitions say what the ages of each mode mean.
	AgeDefinitions []AgeDefinition `json:"age_definitions"`
	Settings       Settings        `json:"settings"`
	Groups         []GroupFit      `json:"groups"`
	Spares         []SparesRow     `json:"spares"`
	Backtest       Backtest        `json:"backtest"`
}

// AgeDefinition says what "age" means for a failure mode.
type AgeDefinition struct {
	Modes   string `json:"modes"`
	Basis   string `json:"age_basis"`
	Meaning string `json:"meaning"`
}

// Settings are the statistics' settings, echoed with the answer.
type Settings struct {
	MinFailures       int                  `json:"min_failures"`
	Confidence        float64              `json:"confidence_fraction"`
	ExpectedHorizonH  float64              `json:"expected_horizon_h"`
	ServiceLevels     []float64            `json:"service_levels_fraction"`
	SwapModes         []health.FailureMode `json:"swap_modes"`
	EnvironmentClass  string               `json:"environment_class"`
	BacktestDays      int                  `json:"backtest_days"`
	BacktestReadingTo string               `json:"backtest_reading"`
}

// GroupFit is the Weibull fit of one group of units for one failure mode,
// or the statement that it has too few failures for one.
type GroupFit struct {
	Dimension string `json:"dimension"`
	Group     string `json:"group"`
	// Mode is a failure mode, or "any".
	Mode     string `json:"mode"`
	AgeBasis string `json:"age_basis"`
	// Lives counts the lives fitted: Failures in the mode and Suspensions
	// (still running, removed, or failed by another mode).
	Lives       int                  `json:"lives"`
	Failures    int                  `json:"failures"`
	Suspensions int                  `json:"suspensions"`
	Status      health.WeibullStatus `json:"status"`
	// Note says why there is no fit when there is none.
	Note string             `json:"note,omitempty"`
	Fit  *health.WeibullFit `json:"fit,omitempty"`
	// Plot holds the failures' probability-plot points (Benard's median
	// ranks with Johnson's adjusted ranks).
	Plot []health.PlotPoint `json:"plot"`
	// RunningUnits are the units of the group in service now, and
	// ExpectedFailures the failures expected among them within the
	// expected horizon (null without a fit).
	RunningUnits     int      `json:"running_units"`
	ExpectedFailures *float64 `json:"expected_failures"`
}

// Status values beyond health's: the data cannot be fitted.
const statusNoFit health.WeibullStatus = "no_fit"

// groupDef is one group: a dimension, its key and which lives belong.
type groupDef struct {
	dim, key string
	has      func(l life) bool
}

// EnvironmentClass names an area's environment class for grouping: its
// location and its ISA-71.04 airborne corrosion level ("outdoor/G3"), two
// registered fields with published meanings, so no threshold of kelvard's
// own decides the class.
func EnvironmentClass(e store.Environment) string {
	return string(e.Location) + "/" + string(e.Corrosion)
}

// lifeSets holds the lives each mode is fitted on.
type lifeSets struct {
	capacitor, fan, unit, any []life
}

func (ix *index) lifeSets(at time.Time) lifeSets {
	return lifeSets{
		capacitor: ix.componentLives(health.ComponentCapacitors, at),
		fan:       ix.componentLives(health.ComponentFan, at),
		unit:      ix.unitLives(at, func(m health.FailureMode) bool { return !isComponentMode(m) }),
		any:       ix.unitLives(at, func(health.FailureMode) bool { return true }),
	}
}

// forMode returns the lives a mode is fitted on and their age basis.
func (s lifeSets) forMode(mode string) ([]life, string) {
	switch health.FailureMode(mode) {
	case health.FailureCapacitors:
		return s.capacitor, AgeComponent
	case health.FailureFan:
		return s.fan, AgeComponent
	}
	if mode == ModeAny {
		return s.any, AgeService
	}
	return s.unit, AgeService
}

// BuildReliability computes the fleet statistics from planning data and
// the daily assessments of drives with capacitor failures, at time at.
func BuildReliability(d *store.PlanningData, days []store.AssessmentDay, cfg Config, at time.Time) (Reliability, error) {
	cfg = cfg.Defaults()
	at = at.UTC()
	ix := newIndex(d)
	sets := ix.lifeSets(at)
	r := Reliability{At: at, Groups: []GroupFit{}, Spares: []SparesRow{},
		Settings: Settings{MinFailures: cfg.MinFailures, Confidence: cfg.Confidence, ExpectedHorizonH: cfg.ExpectHorizonH,
			ServiceLevels: cfg.ServiceLevels, SwapModes: cfg.SwapModes, BacktestDays: cfg.BacktestDays,
			EnvironmentClass:  "location/ISA-71.04 corrosion level of the area the unit stood in when the life ended",
			BacktestReadingTo: "life used at failure below 0.9: the model runs late (failures come before it expects); above 1.1: it runs early (conservative); kelvard's own tolerance"},
		AgeDefinitions: []AgeDefinition{
			{Modes: "dc_bus_capacitors, cooling_fan", Basis: AgeComponent,
				Meaning: "calendar hours since that component was fitted, to its failure, removal, the drive's retirement or now"},
			{Modes: "every other mode, and any", Basis: AgeService,
				Meaning: "hours the unit stood installed at a position since it entered service or since the failure that ended its last life"},
		}}
	opt := health.WeibullOptions{MinFailures: cfg.MinFailures, Confidence: cfg.Confidence}
	fits := map[[3]string]GroupFit{}
	for _, g := range ix.groups() {
		for _, mode := range groupModes(sets, g) {
			gf, err := fitGroup(sets, g, mode, opt, cfg.ExpectHorizonH)
			if err != nil {
				return r, err
			}
			fits[[3]string{g.dim, g.key, mode}] = gf
			r.Groups = append(r.Groups, gf)
		}
	}
	spares, err := ix.spares(sets, fits, cfg)
	if err != nil {
		return r, err
	}
	r.Spares = spares
	r.Backtest = ix.backtest(sets.capacitor, days, cfg)
	return r, nil
}

// groups lists the fleet, each model with drives, and each environment
// class with positions, in a stable order.
func (ix *index) groups() []groupDef {
	out := []groupDef{{dim: DimensionFleet, key: "fleet", has: func(life) bool { return true }}}
	models := map[int64]bool{}
	for _, dr := range ix.d.Drives {
		models[dr.ModelID] = true
	}
	var ms []store.DriveModel
	for id := range models {
		if m, ok := ix.d.Models[id]; ok {
			ms = append(ms, m)
		}
	}
	slices.SortFunc(ms, func(a, b store.DriveModel) int {
		return cmp.Or(strings.Compare(a.Name, b.Name), cmp.Compare(a.ID, b.ID))
	})
	for _, m := range ms {
		id := m.ID
		out = append(out, groupDef{dim: DimensionModel, key: m.Name, has: func(l life) bool { return l.modelID == id }})
	}
	classes := map[string]bool{}
	for _, p := range ix.d.Positions {
		if a, ok := ix.d.Areas[p.AreaID]; ok {
			classes[EnvironmentClass(a.Environment)] = true
		}
	}
	var cs []string
	for c := range classes {
		cs = append(cs, c)
	}
	slices.Sort(cs)
	for _, c := range cs {
		class := c
		out = append(out, groupDef{dim: DimensionEnvironment, key: class, has: func(l life) bool {
			return l.hasArea && EnvironmentClass(ix.d.Areas[l.areaID].Environment) == class
		}})
	}
	return out
}

// groupModes lists the modes reported for a group: capacitors and fans
// always, every other mode with a failure in the group, and any.
func groupModes(sets lifeSets, g groupDef) []string {
	seen := map[health.FailureMode]bool{}
	for _, l := range sets.unit {
		if l.history.Failed && g.has(l) {
			seen[l.history.Mode] = true
		}
	}
	out := []string{string(health.FailureCapacitors), string(health.FailureFan)}
	for _, m := range health.FailureModes() {
		if !isComponentMode(m) && seen[m] {
			out = append(out, string(m))
		}
	}
	return append(out, ModeAny)
}

// fitGroup fits one group and mode.
func fitGroup(sets lifeSets, g groupDef, mode string, opt health.WeibullOptions, horizonH float64) (GroupFit, error) {
	all, basis := sets.forMode(mode)
	var hist []health.UnitHistory
	var running []float64
	for _, l := range all {
		if !g.has(l) {
			continue
		}
		hist = append(hist, l.history)
		if l.running {
			running = append(running, l.history.AgeH)
		}
	}
	filter := health.FailureMode(mode)
	if mode == ModeAny {
		filter = ""
	}
	records := health.LifeRecords(hist, filter)
	gf := GroupFit{Dimension: g.dim, Group: g.key, Mode: mode, AgeBasis: basis, Lives: len(records), RunningUnits: len(running),
		Plot: []health.PlotPoint{}}
	res, err := health.FitWeibull(records, opt)
	if err != nil {
		// Degenerate data (every failure at the largest age, say) is an
		// answer about the group, not a failure of the request.
		gf.Status, gf.Note = statusNoFit, err.Error()
		for _, rec := range records {
			if rec.Failed {
				gf.Failures++
			} else {
				gf.Suspensions++
			}
		}
		return gf, nil
	}
	gf.Failures, gf.Suspensions, gf.Status = res.Failures, res.Suspensions, res.Status
	if gf.Failures > 0 {
		gf.Plot = health.MedianRanks(records)
	}
	if res.Status != health.WeibullFitted {
		gf.Note = fmt.Sprintf("too few failures for a fit: %d recorded, %d needed", res.Failures, res.MinFailures)
		return gf, nil
	}
	gf.Fit = res.Fit
	e := res.Fit.ExpectedFailures(running, horizonH)
	gf.ExpectedFailures = &e
	return gf, nil
}

// ReliabilityFilter limits the groups reported (the spares and backtest
// are always whole).
type ReliabilityFilter struct {
	Dimension string
	Mode      string
}

// Apply keeps the groups that match.
func (f ReliabilityFilter) Apply(r *Reliability) {
	r.Groups = slices.DeleteFunc(r.Groups, func(g GroupFit) bool {
		return (f.Dimension != "" && g.Dimension != f.Dimension) || (f.Mode != "" && g.Mode != f.Mode)
	})
}

// ReliabilityFor loads the planning data and the daily assessments the
// backtest needs and computes the statistics at the store's clock.
func ReliabilityFor(ctx context.Context, st *store.Store, cfg Config) (Reliability, error) {
	if err := cfg.Defaults().Validate(); err != nil {
		return Reliability{}, err
	}
	d, err := st.LoadPlanningData(ctx)
	if err != nil {
		return Reliability{}, err
	}
	var ids []int64
	for _, e := range d.Failures {
		if e.FailureMode == health.FailureCapacitors {
			ids = append(ids, e.DriveID)
		}
	}
	days, err := st.AssessmentDaysOf(ctx, ids)
	if err != nil {
		return Reliability{}, err
	}
	return BuildReliability(d, days, cfg, d.At)
}

// constantRate is the censored exponential estimate r / Σt of a mode's
// failure rate per hour over lives (Lawless, Statistical Models and Methods
// for Lifetime Data: the maximum-likelihood rate with right censoring).
func constantRate(lives []life, mode health.FailureMode) (rate float64, failures int) {
	total := 0.0
	for _, l := range lives {
		total += l.history.AgeH
		if l.history.Failed && l.history.Mode == mode {
			failures++
		}
	}
	if total <= 0 {
		return 0, failures
	}
	return float64(failures) / total, failures
}

// poissonSafe guards a demand against rounding below zero.
func poissonSafe(v float64) float64 {
	if v < 0 || math.IsNaN(v) {
		return 0
	}
	return v
}
