package plan

import (
	"fmt"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// Config holds planning's settings. The zero value takes every default
// (Defaults); each default's basis is on its field.
type Config struct {
	// HorizonMonths is the forecast horizon in calendar months, default 24
	// (the 24-month replacement forecast of the design brief).
	HorizonMonths int
	// RefurbishShare decides replace-or-refurbish: capacitors are replaced
	// in the drive (refurbish) while a capacitor kit costs less than this
	// share of a new drive, otherwise the drive is replaced. Default 0.5:
	// the "repair while it costs less than half of new" rule of thumb of
	// maintenance planning (common practice; no published source).
	RefurbishShare float64
	// LeadMarginDays widens the window in which a forecast item becomes a
	// proposed work order: the model's replenishment lead time
	// (lead_time_days) plus this margin for booking the outage, default 30
	// days (common practice).
	LeadMarginDays float64
	// LookAheadDays is how long before its due date a recurring task is
	// proposed, default 60 days (common practice: about two months of
	// planning look-ahead).
	LookAheadDays float64
	// FindingDueDays is how soon a finding's work is due after the finding
	// was first seen, by severity. Defaults (kelvard's own, common
	// practice in maintenance priority codes): critical 7, major 30,
	// minor 90, advice 180 days.
	FindingDueDays map[health.Severity]float64
	// FilterIntervalMonths is how often drive filters and heatsinks are
	// cleaned, by the area's dust exposure. Defaults (from memory; set
	// them from what the site finds on the filters): no dust 12 months,
	// settling dust 6, circulating fibres 3, windblown dust 3, conductive
	// dust 1.
	FilterIntervalMonths map[health.Dust]int
	// EnergiseEveryMonths is how often a drive in stores is energised,
	// default 12 (common practice: at least yearly, DESIGN.md section 3).
	EnergiseEveryMonths int
	// ReformAfterMonths is how long unpowered a stored drive may stand
	// before its capacitors need reforming rather than energising,
	// default 24 (common practice: reform after more than two years).
	ReformAfterMonths int
	// LabourOverrideH overrides the labour estimate of a task (hours per
	// drive); see Config.TaskLabourH for the defaults.
	LabourOverrideH map[store.WorkTask]float64
	// RedoAfter is how long after an order is done or cancelled its causes
	// may be proposed again, default 30 days (time for the next
	// assessments to see the work).
	RedoAfter time.Duration
	// MinFailures is the fewest failures a Weibull fit needs, default 3
	// (health.FitWeibull's default, common practice).
	MinFailures int
	// Confidence is the two-sided level of the fits' bounds, default 0.90.
	Confidence float64
	// ExpectHorizonH is the horizon of the expected failures, default
	// 8766 h (twelve months of 365.25 days).
	ExpectHorizonH float64
	// ServiceLevels are the spares service levels, default 0.90 and 0.95.
	ServiceLevels []float64
	// SwapModes are the failure modes that take a drive out for the
	// workshop and so draw a spare drive: by default every mode but the
	// cooling fan, which is changed in place from a fan kit (common
	// practice).
	SwapModes []health.FailureMode
	// BacktestDays is how old the last daily assessment before a failure
	// may be to stand for the life used at failure, default 7 days.
	BacktestDays int
}

// Defaults returns c with every unset field at its default.
func (c Config) Defaults() Config {
	if c.HorizonMonths <= 0 {
		c.HorizonMonths = 24
	}
	if c.RefurbishShare <= 0 {
		c.RefurbishShare = 0.5
	}
	if c.LeadMarginDays <= 0 {
		c.LeadMarginDays = 30
	}
	if c.LookAheadDays <= 0 {
		c.LookAheadDays = 60
	}
	if c.FindingDueDays == nil {
		c.FindingDueDays = map[health.Severity]float64{health.SeverityCritical: 7, health.SeverityMajor: 30,
			health.SeverityMinor: 90, health.SeverityAdvice: 180}
	}
	if c.FilterIntervalMonths == nil {
		c.FilterIntervalMonths = map[health.Dust]int{health.DustNone: 12, health.DustSettling: 6, health.DustFibres: 3,
			health.DustWindblown: 3, health.DustConductive: 1}
	}
	if c.EnergiseEveryMonths <= 0 {
		c.EnergiseEveryMonths = 12
	}
	if c.ReformAfterMonths <= 0 {
		c.ReformAfterMonths = 24
	}
	if c.RedoAfter <= 0 {
		c.RedoAfter = 30 * 24 * time.Hour
	}
	if c.MinFailures <= 0 {
		c.MinFailures = 3
	}
	if c.Confidence <= 0 {
		c.Confidence = 0.90
	}
	if c.ExpectHorizonH <= 0 {
		c.ExpectHorizonH = 8766
	}
	if len(c.ServiceLevels) == 0 {
		c.ServiceLevels = []float64{0.90, 0.95}
	}
	if c.SwapModes == nil {
		for _, m := range health.FailureModes() {
			if m != health.FailureFan {
				c.SwapModes = append(c.SwapModes, m)
			}
		}
	}
	if c.BacktestDays <= 0 {
		c.BacktestDays = 7
	}
	return c
}

// Validate reports the first unusable setting, naming it as the API's
// query parameter or the command's flag does.
func (c Config) Validate() error {
	switch {
	case c.HorizonMonths < 1 || c.HorizonMonths > 120:
		return store.Invalid("horizon_months", "must lie between 1 and 120")
	case !(c.RefurbishShare > 0 && c.RefurbishShare <= 1):
		return store.Invalid("refurbish_share", "must lie in (0, 1]")
	case !(c.Confidence > 0 && c.Confidence < 1):
		return store.Invalid("confidence", "must lie between 0 and 1")
	}
	for _, l := range c.ServiceLevels {
		if !(l > 0 && l < 1) {
			return store.Invalid("service_levels", "%v must lie between 0 and 1", l)
		}
	}
	for d, m := range c.FilterIntervalMonths {
		if m < 1 || m > 60 {
			return fmt.Errorf("filter interval for dust %s: %d months must lie between 1 and 60", d, m)
		}
	}
	return nil
}

// defaultTaskLabourH is the labour estimate per drive of each task, in
// hours, for tasks whose time the drive model does not register. They are
// kelvard's planning figures, from memory, meant to be overridden with the
// site's own: energising 1.5 h (30 to 60 min powered at no load plus
// handling, the time from DESIGN.md section 3), reforming 4 h (four steps of
// about 25/50/75/100 % of bus voltage), enclosure work 8 h, cooling or shade
// 6 h, supply correction 3 h, carrier change or resize study 2 h, braking
// or ramp change 2 h, filter and heatsink cleaning 0.5 h, inspection 1 h.
// Capacitor, fan and drive replacement take the model's capacitor_labour_h,
// fan_labour_h and drive_labour_h, falling back to 3, 1 and 4 h.
var defaultTaskLabourH = map[store.WorkTask]float64{
	store.TaskReplaceCapacitors: 3, store.TaskReplaceFan: 1, store.TaskReplaceDrive: 4,
	store.TaskEnergise: 1.5, store.TaskReform: 4, store.TaskUpgradeEnclosure: 8, store.TaskCoolingOrShade: 6,
	store.TaskCorrectSupply: 3, store.TaskLowerCarrierResize: 2, store.TaskBrakingOrLongerRamp: 2,
	store.TaskCleanFilters: 0.5, store.TaskInspect: 1,
}

// TaskLabourH returns the labour estimate of a task on a drive of model m:
// the model's registered hours for replacements, else the configured or
// default figure.
func (c Config) TaskLabourH(task store.WorkTask, m store.DriveModel) float64 {
	switch {
	case task == store.TaskReplaceCapacitors && m.CapacitorLabourH > 0:
		return m.CapacitorLabourH
	case task == store.TaskReplaceFan && m.FanLabourH > 0:
		return m.FanLabourH
	case task == store.TaskReplaceDrive && m.DriveLabourH > 0:
		return m.DriveLabourH
	}
	if h, ok := c.LabourOverrideH[task]; ok {
		return h
	}
	return defaultTaskLabourH[task]
}

// TaskParts names the parts a task needs on a drive of model m.
func TaskParts(task store.WorkTask, m store.DriveModel) string {
	switch task {
	case store.TaskReplaceCapacitors:
		return "DC-bus capacitor kit for " + m.Name
	case store.TaskReplaceFan:
		return "Cooling fan kit for " + m.Name
	case store.TaskReplaceDrive:
		return "Drive " + m.Name + " (spare from stores or new)"
	case store.TaskCleanFilters:
		return "Replacement filter mats as fitted"
	case store.TaskUpgradeEnclosure:
		return "Enclosure rated for the area (see the finding)"
	case store.TaskCoolingOrShade:
		return "Ventilation fan, cooler or sun shade as chosen"
	case store.TaskBrakingOrLongerRamp:
		return "Braking chopper and resistor if the ramp cannot be lengthened"
	}
	return ""
}
