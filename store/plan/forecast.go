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

// Forecast is the replacement forecast: when each drive's capacitors and
// fan reach end of life within the horizon, with the band from the
// harshest and mildest month of the trailing year, priced from the drive
// model's part and labour costs into a budget by month and site.
type Forecast struct {
	At            time.Time `json:"at"`
	HorizonMonths int       `json:"horizon_months"`
	// HorizonEnd is the first instant after the horizon (the start of the
	// month after its last month).
	HorizonEnd time.Time `json:"horizon_end"`
	// RefurbishShare is the replace-or-refurbish share and RefurbishBasis
	// where it comes from.
	RefurbishShare float64 `json:"refurbish_share_fraction"`
	RefurbishBasis string  `json:"refurbish_basis"`
	// Items are the replacements, earliest first: every one whose
	// earliest date falls inside the horizon.
	Items []ForecastItem `json:"items"`
	// Budget sums the items inside the horizon by month and site; Months
	// by month over all sites, one row for every month of the horizon.
	Budget []BudgetRow `json:"budget"`
	Months []BudgetRow `json:"months"`
	Totals Totals      `json:"totals"`
	// Method explains the dates and costs in plain words.
	Method []string `json:"method"`
}

// ForecastItem is one projected replacement of one component of one drive.
type ForecastItem struct {
	DriveID     int64                `json:"drive_id"`
	Serial      string               `json:"serial"`
	ModelID     int64                `json:"model_id"`
	Model       string               `json:"model"`
	SiteID      int64                `json:"site_id"`
	Site        string               `json:"site"`
	AreaID      *int64               `json:"area_id"`
	Area        string               `json:"area"`
	PositionID  *int64               `json:"position_id"`
	Position    string               `json:"position"`
	Component   health.ComponentKind `json:"component"`
	ComponentID int64                `json:"component_id"`
	// Cycle 1 is the part fitted now; 2 its replacement, aged at the same
	// trailing rate, and so on.
	Cycle            int     `json:"cycle"`
	LifeUsedFraction float64 `json:"life_used_fraction"`
	DamageRatePerH   float64 `json:"damage_rate_per_h"`
	// EndOfLife is the projected date at the trailing-year damage rate;
	// Earliest and Latest are the dates if every remaining month were like
	// the harshest or the mildest month of that year (Latest null when the
	// mildest month did no damage).
	EndOfLife         time.Time  `json:"end_of_life"`
	EndOfLifeEarliest time.Time  `json:"end_of_life_earliest"`
	EndOfLifeLatest   *time.Time `json:"end_of_life_latest"`
	// Overdue is true when the date is already past: the work falls in the
	// first month.
	Overdue bool `json:"overdue"`
	// Month is the budget month (YYYY-MM); InBudget is false for an item
	// inside the horizon only by its earliest date.
	Month    string `json:"month"`
	InBudget bool   `json:"in_budget"`
	// Action is replace_capacitors (refurbish), replace_drive or
	// replace_fan; Refurbish says how a capacitor item was decided.
	Action     store.WorkTask     `json:"action"`
	Refurbish  *RefurbishDecision `json:"refurbish,omitempty"`
	PartsCost  float64            `json:"parts_cost"`
	LabourH    float64            `json:"labour_h"`
	LabourCost float64            `json:"labour_cost"`
	TotalCost  float64            `json:"total_cost"`
}

// RefurbishDecision is a replace-or-refurbish choice: refurbish (replace the
// capacitors) while the kit costs less than the share of a new drive.
type RefurbishDecision struct {
	CapacitorKitCost float64 `json:"capacitor_kit_cost"`
	DriveCost        float64 `json:"drive_cost"`
	ShareFraction    float64 `json:"share_fraction"`
	ThresholdCost    float64 `json:"threshold_cost"`
	Choice           string  `json:"choice"`
	Reason           string  `json:"reason"`
}

// BudgetRow is the forecast cost of one month (at one site, or all sites
// when Site is empty).
type BudgetRow struct {
	Month                   string  `json:"month"`
	SiteID                  int64   `json:"site_id,omitempty"`
	Site                    string  `json:"site,omitempty"`
	CapacitorRefurbishments int     `json:"capacitor_refurbishments"`
	DriveReplacements       int     `json:"drive_replacements"`
	FanReplacements         int     `json:"fan_replacements"`
	PartsCost               float64 `json:"parts_cost"`
	LabourH                 float64 `json:"labour_h"`
	LabourCost              float64 `json:"labour_cost"`
	TotalCost               float64 `json:"total_cost"`
}

// Totals are the horizon's totals: expected (every item at its projected
// date), and the earliest and latest cases (every item at the end of its
// band that lies earlier or later).
type Totals struct {
	Expected     BudgetRow `json:"expected"`
	EarliestCase BudgetRow `json:"earliest_case"`
	LatestCase   BudgetRow `json:"latest_case"`
}

// maxCycles bounds the replacements of one component inside a horizon.
const maxCycles = 120

// BuildForecast computes the forecast from planning data at time at.
//
// Dates: the assessment's projection (health.LifeReport): end of life at
// (1 - D)/r hours after the last reading, r the trailing-12-month damage
// rate, with the band from the harshest and mildest 30-day block of that
// year; an end already reached is overdue and falls in the first month.
// After a replacement the new part is assumed to age at the same rates, so
// cycle k+1 comes 1/r hours after cycle k (1/r_harshest and 1/r_mildest for
// the band). A drive replaced whole gets a new fan too, so its fan cycles
// restart from the drive replacement.
//
// Costs: a capacitor item costs capacitor_kit_cost + capacitor_labour_h ×
// labour_cost_per_h when the kit costs less than RefurbishShare ×
// drive_cost (refurbish), else drive_cost + drive_labour_h ×
// labour_cost_per_h (replace the drive); a fan item fan_kit_cost +
// fan_labour_h × labour_cost_per_h. Labour hours a model does not register
// take Config.TaskLabourH's defaults.
func BuildForecast(d *store.PlanningData, cfg Config, at time.Time) Forecast {
	cfg = cfg.Defaults()
	at = at.UTC()
	start, _ := store.MonthWindow(at)
	end := start.AddDate(0, cfg.HorizonMonths, 0)
	f := Forecast{At: at, HorizonMonths: cfg.HorizonMonths, HorizonEnd: end, RefurbishShare: cfg.RefurbishShare,
		RefurbishBasis: "common practice: repair while it costs less than the given share of new (default half); no published source",
		Items:          []ForecastItem{}, Budget: []BudgetRow{}}
	f.Method = []string{
		"End of life = last reading + (1 - life used) / damage rate over the trailing 12 months (Palmgren-Miner rule, DESIGN.md section 3).",
		"Band: the same with the rate of the harshest (earliest) and mildest (latest) 30-day block of the trailing year.",
		"A replaced part ages at the same rates: the next replacement follows after 1 / damage rate hours.",
		fmt.Sprintf("Capacitors are replaced in the drive while the kit costs less than %.0f %% of a new drive; otherwise the drive is replaced, with a new fan.", cfg.RefurbishShare*100),
		"Costs: parts from the drive model (capacitor_kit_cost, fan_kit_cost, drive_cost) plus labour hours × labour_cost_per_h.",
	}
	idx := newIndex(d)
	for _, dr := range d.Drives {
		if dr.Status == health.StatusRetired {
			continue
		}
		life, ok := d.Lives[dr.ID]
		if !ok {
			continue
		}
		m := d.Models[dr.ModelID]
		base := idx.itemBase(dr, m)
		capItems := componentItems(base, health.ComponentCapacitors, idx.current(dr.ID, health.ComponentCapacitors), life.Capacitor, at, end, nil)
		var driveReplaced []time.Time
		for i := range capItems {
			priceCapacitor(&capItems[i], m, cfg)
			if capItems[i].Action == store.TaskReplaceDrive {
				driveReplaced = append(driveReplaced, capItems[i].EndOfLife)
			}
		}
		fanItems := componentItems(base, health.ComponentFan, idx.current(dr.ID, health.ComponentFan), life.Fan, at, end, driveReplaced)
		for i := range fanItems {
			priceFan(&fanItems[i], m, cfg)
		}
		f.Items = append(f.Items, capItems...)
		f.Items = append(f.Items, fanItems...)
	}
	slices.SortStableFunc(f.Items, func(a, b ForecastItem) int {
		return cmp.Or(a.EndOfLife.Compare(b.EndOfLife), strings.Compare(a.Serial, b.Serial),
			strings.Compare(string(a.Component), string(b.Component)), cmp.Compare(a.Cycle, b.Cycle))
	})
	f.summarise(start, end)
	return f
}

// componentItems projects one component's replacements. restarts are
// drive replacements after which the component starts new (a fan in a new
// drive).
func componentItems(base ForecastItem, kind health.ComponentKind, componentID int64, r health.LifeReport, at, end time.Time,
	restarts []time.Time) []ForecastItem {
	var first, early time.Time
	var late *time.Time
	switch {
	case r.EndReached:
		first, early = at, at
		late = &at
	case r.Projected && r.EndOfLifeAt > 0:
		first = time.Unix(r.EndOfLifeAt, 0).UTC()
		early = first
		if r.EndOfLifeEarliestAt > 0 {
			early = time.Unix(r.EndOfLifeEarliestAt, 0).UTC()
		}
		switch {
		case r.EndOfLifeLatestAt > 0:
			t := time.Unix(r.EndOfLifeLatestAt, 0).UTC()
			late = &t
		case len(r.BlockRatesPerH) < 2:
			t := first
			late = &t
		}
	default:
		return nil
	}
	// Periods of later cycles: whole lives at the trailing, harshest and
	// mildest rates.
	period, periodE, periodL := lifeHours(r.DamageRatePerH), math.Inf(1), math.Inf(1)
	if len(r.BlockRatesPerH) >= 2 {
		periodE, periodL = lifeHours(slices.Max(r.BlockRatesPerH)), lifeHours(slices.Min(r.BlockRatesPerH))
	} else {
		periodE, periodL = period, period
	}
	overdue := r.EndReached || first.Before(at)
	point, pe := later(first, at), later(early, at)
	var pl *time.Time
	if late != nil {
		t := later(*late, at)
		pl = &t
	}
	var out []ForecastItem
	last := time.Time{}
	for cycle := 1; cycle <= maxCycles; cycle++ {
		// A drive replaced before this date brings a new part.
		if i := slices.IndexFunc(restarts, func(t time.Time) bool { return t.After(last) && !t.After(point) }); i >= 0 {
			t := restarts[i]
			last = t
			point, pe = addH(t, period), addH(t, periodE)
			if pl != nil {
				l := addH(t, periodL)
				pl = &l
			}
			overdue = false
			continue
		}
		if !pe.Before(end) {
			break
		}
		it := base
		it.Component, it.ComponentID, it.Cycle = kind, componentID, cycle
		it.LifeUsedFraction, it.DamageRatePerH = r.LifeUsedAtAssessmentFraction, r.DamageRatePerH
		if cycle > 1 {
			it.LifeUsedFraction = 0
		}
		it.EndOfLife, it.EndOfLifeEarliest = point, pe
		if pl != nil {
			l := *pl
			it.EndOfLifeLatest = &l
		}
		it.Overdue = overdue && cycle == 1
		it.Month = point.Format("2006-01")
		it.InBudget = point.Before(end)
		out = append(out, it)
		if math.IsInf(period, 1) {
			break
		}
		last = point
		point, pe = addH(point, period), addH(pe, periodE)
		if pl != nil {
			l := addH(*pl, periodL)
			pl = &l
		}
		overdue = false
	}
	return out
}

// lifeHours is the hours one whole life lasts at a damage rate per hour.
func lifeHours(rate float64) float64 {
	if !(rate > 0) {
		return math.Inf(1)
	}
	return 1 / rate
}

// addH adds hours to t; an infinite or huge span gives a date far beyond
// any horizon.
func addH(t time.Time, h float64) time.Time {
	if math.IsInf(h, 1) || h > 1e6 {
		return t.AddDate(200, 0, 0)
	}
	return t.Add(time.Duration(math.Round(h * 3600 * 1e9)))
}

func later(a, b time.Time) time.Time {
	if a.Before(b) {
		return b
	}
	return a
}

// priceCapacitor decides refurbish or replace and prices the item.
func priceCapacitor(it *ForecastItem, m store.DriveModel, cfg Config) {
	dec := RefurbishDecision{CapacitorKitCost: m.CapacitorKitCost, DriveCost: m.DriveCost, ShareFraction: cfg.RefurbishShare,
		ThresholdCost: cfg.RefurbishShare * m.DriveCost}
	switch {
	case m.DriveCost <= 0:
		dec.Choice, dec.Reason = "refurbish", "no drive cost registered: capacitors are replaced"
	case m.CapacitorKitCost < dec.ThresholdCost:
		dec.Choice = "refurbish"
		dec.Reason = fmt.Sprintf("the capacitor kit (%.2f) costs less than %.0f %% of a new drive (%.2f)", m.CapacitorKitCost, cfg.RefurbishShare*100, dec.ThresholdCost)
	default:
		dec.Choice = "replace_drive"
		dec.Reason = fmt.Sprintf("the capacitor kit (%.2f) costs at least %.0f %% of a new drive (%.2f)", m.CapacitorKitCost, cfg.RefurbishShare*100, dec.ThresholdCost)
	}
	it.Refurbish = &dec
	if dec.Choice == "refurbish" {
		it.Action, it.PartsCost = store.TaskReplaceCapacitors, m.CapacitorKitCost
	} else {
		it.Action, it.PartsCost = store.TaskReplaceDrive, m.DriveCost
	}
	it.LabourH = cfg.TaskLabourH(it.Action, m)
	it.LabourCost = it.LabourH * m.LabourCostPerH
	it.TotalCost = it.PartsCost + it.LabourCost
}

// priceFan prices a fan replacement.
func priceFan(it *ForecastItem, m store.DriveModel, cfg Config) {
	it.Action, it.PartsCost = store.TaskReplaceFan, m.FanKitCost
	it.LabourH = cfg.TaskLabourH(store.TaskReplaceFan, m)
	it.LabourCost = it.LabourH * m.LabourCostPerH
	it.TotalCost = it.PartsCost + it.LabourCost
}

// add accrues an item's counts and costs to a row.
func (b *BudgetRow) add(it ForecastItem) {
	switch it.Action {
	case store.TaskReplaceCapacitors:
		b.CapacitorRefurbishments++
	case store.TaskReplaceDrive:
		b.DriveReplacements++
	case store.TaskReplaceFan:
		b.FanReplacements++
	}
	b.PartsCost += it.PartsCost
	b.LabourH += it.LabourH
	b.LabourCost += it.LabourCost
	b.TotalCost += it.TotalCost
}

// summarise builds the budget rows and totals from the items.
func (f *Forecast) summarise(start, end time.Time) {
	type key struct {
		month string
		site  int64
	}
	rows := map[key]*BudgetRow{}
	months := map[string]*BudgetRow{}
	for m := start; m.Before(end); m = m.AddDate(0, 1, 0) {
		s := m.Format("2006-01")
		months[s] = &BudgetRow{Month: s}
		f.Months = append(f.Months, BudgetRow{Month: s})
	}
	f.Totals.Expected.Month = "horizon"
	f.Totals.EarliestCase.Month = "horizon"
	f.Totals.LatestCase.Month = "horizon"
	for _, it := range f.Items {
		if it.InBudget {
			k := key{it.Month, it.SiteID}
			r, ok := rows[k]
			if !ok {
				r = &BudgetRow{Month: it.Month, SiteID: it.SiteID, Site: it.Site}
				rows[k] = r
			}
			r.add(it)
			months[it.Month].add(it)
			f.Totals.Expected.add(it)
		}
		if it.EndOfLifeEarliest.Before(end) {
			f.Totals.EarliestCase.add(it)
		}
		if it.EndOfLifeLatest != nil && it.EndOfLifeLatest.Before(end) {
			f.Totals.LatestCase.add(it)
		}
	}
	for k := range rows {
		f.Budget = append(f.Budget, *rows[k])
	}
	slices.SortFunc(f.Budget, func(a, b BudgetRow) int {
		return cmp.Or(strings.Compare(a.Month, b.Month), strings.Compare(a.Site, b.Site), cmp.Compare(a.SiteID, b.SiteID))
	})
	for i := range f.Months {
		f.Months[i] = *months[f.Months[i].Month]
	}
}

// ForecastFor loads the planning data and builds the forecast at the store's
// clock.
func ForecastFor(ctx context.Context, st *store.Store, cfg Config) (Forecast, error) {
	if err := cfg.Defaults().Validate(); err != nil {
		return Forecast{}, err
	}
	d, err := st.LoadPlanningData(ctx)
	if err != nil {
		return Forecast{}, err
	}
	return BuildForecast(d, cfg, d.At), nil
}
