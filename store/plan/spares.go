package plan

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strings"

	"kelvard/health"
	"kelvard/store"
)

// SparesRow is the spare drives to hold for one model over its
// replenishment lead time, at each service level, against spares_on_hand.
type SparesRow struct {
	ModelID      int64   `json:"model_id"`
	Model        string  `json:"model"`
	LeadTimeDays float64 `json:"lead_time_days"`
	// RunningUnits are the model's installed drives; InStores its drives in
	// stores now (for comparison: the plan counts spares_on_hand).
	RunningUnits int `json:"running_units"`
	InStores     int `json:"in_stores"`
	SparesOnHand int `json:"spares_on_hand"`
	// ExpectedDemand is λ, the expected failures that draw a spare drive
	// within the lead time, summed over Demand.
	ExpectedDemand float64      `json:"expected_demand"`
	Demand         []ModeDemand `json:"demand"`
	// Levels are the Poisson plans (health.SparesToHold) at each service
	// level; Shortfall is the largest shortfall among them.
	Levels    []health.SparesPlan `json:"levels"`
	Shortfall int                 `json:"shortfall"`
}

// ModeDemand is the expected demand from one failure mode and the
// statistics it was taken from.
type ModeDemand struct {
	Mode     health.FailureMode `json:"mode"`
	Demand   float64            `json:"demand"`
	Source   string             `json:"source"`
	Failures int                `json:"failures,omitempty"`
}

// spares sizes the spares of every model with drives. For each mode that
// takes a drive out (Config.SwapModes) the demand over the lead time L is
// Σ over the model's running units of the conditional probability of
// failing within L at the unit's age (health.Weibull.ExpectedFailures),
// from the model's fit for the mode, else the fleet's fit, else a
// constant rate r = failures/Σ ages over the fleet's lives (demand
// n·(1 - e^(-rL))). The demand of the modes adds up (independent
// competing modes) and the spares follow from the Poisson model
// (health.SparesToHold).
func (ix *index) spares(sets lifeSets, fits map[[3]string]GroupFit, cfg Config) ([]SparesRow, error) {
	var models []store.DriveModel
	seen := map[int64]bool{}
	for _, dr := range ix.d.Drives {
		if !seen[dr.ModelID] {
			seen[dr.ModelID] = true
			if m, ok := ix.d.Models[dr.ModelID]; ok {
				models = append(models, m)
			}
		}
	}
	slices.SortFunc(models, func(a, b store.DriveModel) int {
		return cmp.Or(strings.Compare(a.Name, b.Name), cmp.Compare(a.ID, b.ID))
	})
	var out []SparesRow
	for _, m := range models {
		row := SparesRow{ModelID: m.ID, Model: m.Name, LeadTimeDays: m.LeadTimeDays, SparesOnHand: m.SparesOnHand, Demand: []ModeDemand{}}
		for _, dr := range ix.d.Drives {
			if dr.ModelID != m.ID {
				continue
			}
			switch dr.Status {
			case health.StatusInstalled:
				row.RunningUnits++
			case health.StatusInStores:
				row.InStores++
			}
		}
		leadH := m.LeadTimeDays * 24
		for _, mode := range cfg.SwapModes {
			lives, _ := sets.forMode(string(mode))
			var ages []float64
			for _, l := range lives {
				if l.running && l.modelID == m.ID {
					ages = append(ages, l.history.AgeH)
				}
			}
			md := ModeDemand{Mode: mode}
			if f, ok := fits[[3]string{DimensionModel, m.Name, string(mode)}]; ok && f.Fit != nil {
				md.Demand, md.Source, md.Failures = f.Fit.ExpectedFailures(ages, leadH), "Weibull fit of the model", f.Failures
			} else if f, ok := fits[[3]string{DimensionFleet, "fleet", string(mode)}]; ok && f.Fit != nil {
				md.Demand, md.Source, md.Failures = f.Fit.ExpectedFailures(ages, leadH), "Weibull fit of the fleet (the model has too few failures)", f.Failures
			} else {
				rate, n := constantRate(lives, mode)
				md.Failures = n
				if rate > 0 {
					md.Demand = float64(len(ages)) * -math.Expm1(-rate*leadH)
					md.Source = fmt.Sprintf("constant rate %.3g per hour over the fleet (too few failures for a Weibull fit)", rate)
				} else {
					md.Source = "no failures recorded"
				}
			}
			md.Demand = poissonSafe(md.Demand)
			row.ExpectedDemand += md.Demand
			row.Demand = append(row.Demand, md)
		}
		for _, level := range cfg.ServiceLevels {
			p, err := health.SparesToHold(row.ExpectedDemand, level, m.SparesOnHand)
			if err != nil {
				return nil, fmt.Errorf("spares of %s: %w", m.Name, err)
			}
			row.Levels = append(row.Levels, p)
			row.Shortfall = max(row.Shortfall, p.Shortfall)
		}
		out = append(out, row)
	}
	return out, nil
}
