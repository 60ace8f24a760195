package plan

import (
	"cmp"
	"fmt"
	"slices"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// ruleTasks maps each rule whose remedy is physical work to the task that
// carries it out. Rules not listed become an inspection.
var ruleTasks = map[string]store.WorkTask{
	"capacitor.end_of_life":                store.TaskReplaceCapacitors,
	"capacitor.end_of_life_near":           store.TaskReplaceCapacitors,
	"capacitor.measured_degradation":       store.TaskReplaceCapacitors,
	"fan.end_of_life":                      store.TaskReplaceFan,
	"fan.end_of_life_near":                 store.TaskReplaceFan,
	"fan.heatsink_rise":                    store.TaskCleanFilters,
	"storage.energise_due":                 store.TaskEnergise,
	"storage.reform_required":              store.TaskReform,
	"enclosure.condensation":               store.TaskUpgradeEnclosure,
	"enclosure.corrosion":                  store.TaskUpgradeEnclosure,
	"enclosure.dust":                       store.TaskUpgradeEnclosure,
	"enclosure.ice":                        store.TaskUpgradeEnclosure,
	"enclosure.oil":                        store.TaskUpgradeEnclosure,
	"enclosure.outdoor":                    store.TaskUpgradeEnclosure,
	"enclosure.sun":                        store.TaskCoolingOrShade,
	"enclosure.water":                      store.TaskUpgradeEnclosure,
	"environment.board_corrosion":          store.TaskUpgradeEnclosure,
	"environment.ambient_above_rating":     store.TaskCoolingOrShade,
	"environment.cabinet_air_above_rating": store.TaskCoolingOrShade,
	"environment.cabinet_cooling_capacity": store.TaskCoolingOrShade,
	"environment.altitude_insulation":      store.TaskInspect,
	"environment.hazardous_location":       store.TaskInspect,
	"derating.out_of_rating":               store.TaskCoolingOrShade,
	"derating.single_phase_supply":         store.TaskCorrectSupply,
	"derating.carrier":                     store.TaskLowerCarrierResize,
	"derating.utilisation_high":            store.TaskLowerCarrierResize,
	"derating.overload_peak":               store.TaskLowerCarrierResize,
	"derating.overload_trips":              store.TaskLowerCarrierResize,
	"dc_bus.voltage_deviation":             store.TaskCorrectSupply,
	"dc_bus.ripple_rising":                 store.TaskInspect,
	"dc_bus.overvoltage_on_deceleration":   store.TaskBrakingOrLongerRamp,
	"dc_bus.near_overvoltage_trip":         store.TaskBrakingOrLongerRamp,
	"data_quality.silent":                  store.TaskInspect,
	"data_quality.stuck_sensor":            store.TaskInspect,
	"data_quality.implausible_jump":        store.TaskInspect,
	"data_quality.fahrenheit_suspected":    store.TaskInspect,
}

// TaskForRule returns the task that carries out a rule's remedy.
func TaskForRule(rule string) store.WorkTask {
	if t, ok := ruleTasks[rule]; ok {
		return t
	}
	return store.TaskInspect
}

// BuildProposals lists the work planning proposes at time at:
//
//   - every open or acknowledged finding whose remedy is physical work,
//     due its severity's days (Config.FindingDueDays) after it was first
//     seen; findings asking the same task of the same drive make one line,
//     caused by the most severe and naming the others;
//   - every forecast replacement of a part fitted now in an installed
//     drive whose earliest date falls within the model's lead time plus
//     Config.LeadMarginDays, due at that earliest date;
//   - filter and heatsink cleaning of every installed drive, once per
//     period of the area's dust interval (Config.FilterIntervalMonths,
//     calendar-aligned periods), due on the period's last day;
//   - energising each drive in stores a year after it was last powered
//     (reforming instead once it has stood Config.ReformAfterMonths).
//
// Recurring tasks are proposed Config.LookAheadDays before they are due.
// A due date already past becomes at. Each line's window is the calendar
// month of its due date.
func BuildProposals(d *store.PlanningData, f Forecast, cfg Config, at time.Time) []store.ProposedLine {
	cfg = cfg.Defaults()
	at = at.UTC()
	ix := newIndex(d)
	var out []store.ProposedLine
	add := func(p store.ProposedLine) {
		if p.DueAt.Before(at) {
			p.DueAt = at
		}
		p.WindowStart, p.WindowEnd = store.MonthWindow(p.DueAt)
		out = append(out, p)
	}
	risk := func(driveID int64) float64 { return d.Lives[driveID].RiskScore }

	// One line per drive and task: the most severe finding is the cause,
	// the others of the same task are named in its reason.
	type driveTask struct {
		drive int64
		task  store.WorkTask
	}
	groups := map[driveTask][]store.Finding{}
	var order []driveTask
	for _, fd := range d.Findings {
		if !fd.PhysicalWork {
			continue
		}
		dt := driveTask{fd.DriveID, TaskForRule(fd.Rule)}
		if _, seen := groups[dt]; !seen {
			order = append(order, dt)
		}
		groups[dt] = append(groups[dt], fd)
	}
	for _, dt := range order {
		fs := groups[dt]
		slices.SortStableFunc(fs, func(a, b store.Finding) int {
			return cmp.Or(cmp.Compare(b.Severity.Rank(), a.Severity.Rank()), cmp.Compare(a.ID, b.ID))
		})
		fd := fs[0]
		dr, ok := ix.drive(fd.DriveID)
		if !ok || dr.Status == health.StatusRetired {
			continue
		}
		m := d.Models[dr.ModelID]
		area := fd.AreaID
		if area == nil && dr.PositionID == nil {
			area = dr.StoresAreaID
		}
		due := fd.FirstSeenAt.Add(time.Duration(cfg.FindingDueDays[fd.Severity] * 24 * float64(time.Hour)))
		reason := fmt.Sprintf("Finding %d, %s (%s): %s", fd.ID, fd.Rule, fd.Severity, fd.Message)
		if len(fs) > 1 {
			var also []string
			for _, o := range fs[1:] {
				also = append(also, fmt.Sprintf("finding %d, %s (%s)", o.ID, o.Rule, o.Severity))
				if d := o.FirstSeenAt.Add(time.Duration(cfg.FindingDueDays[o.Severity] * 24 * float64(time.Hour))); d.Before(due) {
					due = d
				}
			}
			reason += " Also: " + strings.Join(also, "; ") + "."
		}
		id := fd.ID
		add(store.ProposedLine{SiteID: fd.SiteID, AreaID: area, DriveID: dr.ID, PositionID: fd.PositionID, Task: dt.task,
			Parts: TaskParts(dt.task, m), LabourH: cfg.TaskLabourH(dt.task, m), Reason: reason,
			CauseKind: store.CauseFinding, CauseKey: fmt.Sprintf("finding:%d", fd.ID), FindingID: &id,
			DueAt: due, RiskScore: risk(dr.ID)})
	}

	for _, it := range f.Items {
		if it.Cycle != 1 || it.PositionID == nil || it.ComponentID == 0 {
			continue
		}
		dr, ok := ix.drive(it.DriveID)
		if !ok || dr.Status != health.StatusInstalled {
			continue
		}
		m := d.Models[dr.ModelID]
		window := at.Add(time.Duration((m.LeadTimeDays + cfg.LeadMarginDays) * 24 * float64(time.Hour)))
		if it.EndOfLifeEarliest.After(window) {
			continue
		}
		band := "open-ended"
		if it.EndOfLifeLatest != nil {
			band = it.EndOfLifeLatest.Format(time.DateOnly)
		}
		add(store.ProposedLine{SiteID: it.SiteID, AreaID: it.AreaID, DriveID: it.DriveID, PositionID: it.PositionID, Task: it.Action,
			Parts: TaskParts(it.Action, m), LabourH: it.LabourH,
			Reason: fmt.Sprintf("Forecast: %s end of life projected %s (band %s to %s), %.0f %% of life used; lead time %.0f days",
				componentWords(it.Component), it.EndOfLife.Format(time.DateOnly), it.EndOfLifeEarliest.Format(time.DateOnly), band,
				it.LifeUsedFraction*100, m.LeadTimeDays),
			CauseKind: store.CauseForecast, CauseKey: fmt.Sprintf("forecast:%s:%d", it.Component, it.ComponentID),
			DueAt: it.EndOfLifeEarliest, RiskScore: risk(it.DriveID)})
	}

	lookAhead := time.Duration(cfg.LookAheadDays * 24 * float64(time.Hour))
	for _, dr := range d.Drives {
		switch dr.Status {
		case health.StatusInstalled:
			p, ok := d.Positions[*dr.PositionID]
			if !ok {
				continue
			}
			a := d.Areas[p.AreaID]
			months := cfg.FilterIntervalMonths[a.Environment.Dust]
			if months <= 0 {
				months = 12
			}
			start, end := calendarPeriod(at, months)
			due := end.AddDate(0, 0, -1)
			if due.Sub(at) > lookAhead {
				continue
			}
			m := d.Models[dr.ModelID]
			pos, area := p.ID, p.AreaID
			add(store.ProposedLine{SiteID: p.SiteID, AreaID: &area, DriveID: dr.ID, PositionID: &pos, Task: store.TaskCleanFilters,
				Parts: TaskParts(store.TaskCleanFilters, m), LabourH: cfg.TaskLabourH(store.TaskCleanFilters, m),
				Reason: fmt.Sprintf("Recurring: clean filters and heatsink every %d months for %s dust in %s (period %s to %s)",
					months, a.Environment.Dust, a.Name, start.Format(time.DateOnly), due.Format(time.DateOnly)),
				CauseKind: store.CauseRecurring, CauseKey: fmt.Sprintf("recurring:%s:%d:%s", store.TaskCleanFilters, dr.ID, start.Format("2006-01")),
				DueAt: due, RiskScore: risk(dr.ID)})
		case health.StatusInStores:
			last := ix.lastPowered(dr)
			due := last.AddDate(0, cfg.EnergiseEveryMonths, 0)
			if due.Sub(at) > lookAhead {
				continue
			}
			task := store.TaskEnergise
			why := fmt.Sprintf("Recurring: energise drives in stores every %d months; last powered %s", cfg.EnergiseEveryMonths, last.Format(time.DateOnly))
			if at.After(last.AddDate(0, cfg.ReformAfterMonths, 0)) {
				task = store.TaskReform
				why = fmt.Sprintf("Recurring: unpowered since %s, more than %d months: reform the capacitors before energising", last.Format(time.DateOnly), cfg.ReformAfterMonths)
			}
			m := d.Models[dr.ModelID]
			add(store.ProposedLine{SiteID: dr.SiteID, AreaID: dr.StoresAreaID, DriveID: dr.ID, Task: task,
				Parts: TaskParts(task, m), LabourH: cfg.TaskLabourH(task, m), Reason: why,
				CauseKind: store.CauseRecurring, CauseKey: fmt.Sprintf("recurring:%s:%d:%s", task, dr.ID, due.Format(time.DateOnly)),
				DueAt: due, RiskScore: risk(dr.ID)})
		}
	}
	slices.SortStableFunc(out, func(a, b store.ProposedLine) int {
		return cmp.Or(a.DueAt.Compare(b.DueAt), strings.Compare(a.CauseKey, b.CauseKey))
	})
	return out
}

// calendarPeriod returns the period of the given length in months holding
// t, periods counted from January of year 0 so they fall on the same
// months every year (quarters for 3, halves for 6, years for 12).
func calendarPeriod(t time.Time, months int) (start, end time.Time) {
	t = t.UTC()
	idx := t.Year()*12 + int(t.Month()) - 1
	idx -= idx % months
	start = time.Date(idx/12, time.Month(idx%12+1), 1, 0, 0, 0, 0, time.UTC)
	return start, start.AddDate(0, months, 0)
}

// lastPowered is when a stored drive was last energised: its recorded date,
// else its last removal from a position, else its manufacture.
func (ix *index) lastPowered(dr store.Drive) time.Time {
	last := dr.ManufacturedAt
	for _, in := range ix.installs[dr.ID] {
		if in.RemovedAt != nil && in.RemovedAt.After(last) {
			last = *in.RemovedAt
		}
	}
	if dr.LastEnergisedAt != nil && dr.LastEnergisedAt.After(last) {
		last = *dr.LastEnergisedAt
	}
	return last.UTC()
}

func componentWords(k health.ComponentKind) string {
	if k == health.ComponentFan {
		return "cooling fan"
	}
	return "DC-bus capacitors"
}
