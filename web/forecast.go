package web

import (
	"fmt"
	"math"
	"net/http"
	"slices"
	"strconv"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/plan"
	"kelvard/web/chart"
)

// horizonChoices are the forecast horizons offered, in months; the query
// may ask for any whole number of months from 1 to 120.
var horizonChoices = []int{6, 12, 24, 36, 60, 120}

// defaultHorizon is the design brief's 24-month forecast.
const defaultHorizon = 24

// forecastItemsShown caps the items table; the API's CSV export has them
// all.
const forecastItemsShown = 500

// forecastPage is the replacement forecast: the budget by month and site
// as a chart and tables, and the items with their dates and bands.
type forecastPage struct {
	F        plan.Forecast
	Horizon  int
	Horizons []choiceCount
	Chart    chartView
	Items    []plan.ForecastItem
	// More counts the items beyond those shown.
	More    int
	Counts  forecastCounts
	Totals  []totalRow
	Caution string
	// From and To name the horizon's first and last months.
	From, To string
}

// totalRow is one case of the horizon's totals.
type totalRow struct {
	Name string
	Row  plan.BudgetRow
}

// forecastCounts counts the items by the work they call for.
type forecastCounts struct {
	Refurbish, ReplaceDrive, Fan, Overdue, OutsideBudget int
}

// forecast shows the replacement forecast over the chosen horizon.
func (h *Handler) forecast(w http.ResponseWriter, r *http.Request) {
	horizon := defaultHorizon
	if v := r.URL.Query().Get("horizon"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 || n > 120 {
			h.errorPage(w, r, http.StatusBadRequest, "The horizon must be a whole number of months from 1 to 120.")
			return
		}
		horizon = n
	}
	f, err := plan.ForecastFor(r.Context(), h.st, plan.Config{HorizonMonths: horizon})
	if err != nil {
		h.fail(w, r, err)
		return
	}
	p := forecastPage{F: f, Horizon: horizon, Caution: health.SafetyCaution, Totals: []totalRow{
		{"Expected", f.Totals.Expected},
		{"Earliest case", f.Totals.EarliestCase},
		{"Latest case", f.Totals.LatestCase},
	}}
	choices := horizonChoices
	if !slices.Contains(choices, horizon) {
		choices = append(slices.Clone(choices), horizon)
		slices.Sort(choices)
	}
	for _, n := range choices {
		p.Horizons = append(p.Horizons, choiceCount{Key: strconv.Itoa(n), Label: strconv.Itoa(n) + " months", Current: n == horizon})
	}
	if len(f.Months) > 0 {
		p.From, p.To = monthLabel(f.Months[0].Month), monthLabel(f.Months[len(f.Months)-1].Month)
	}
	for _, it := range f.Items {
		switch it.Action {
		case store.TaskReplaceCapacitors:
			p.Counts.Refurbish++
		case store.TaskReplaceDrive:
			p.Counts.ReplaceDrive++
		case store.TaskReplaceFan:
			p.Counts.Fan++
		}
		if it.Overdue {
			p.Counts.Overdue++
		}
		if !it.InBudget {
			p.Counts.OutsideBudget++
		}
	}
	p.Items = f.Items
	if len(p.Items) > forecastItemsShown {
		p.More = len(p.Items) - forecastItemsShown
		p.Items = p.Items[:forecastItemsShown]
	}
	p.Chart = budgetChart(f, p.From, p.To)
	h.render(w, r, http.StatusOK, "forecast", "Replacement forecast", "forecast", p)
}

// budgetChart draws the expected cost of each month as a bar stacked by
// site, with the same numbers as a table and the totals in sentences.
func budgetChart(f plan.Forecast, from, to string) chartView {
	cv := chartView{ID: "chart-budget", Title: "Budget by month and site",
		Caption: fmt.Sprintf("Expected cost of the replacements projected in each month from %s to %s, stacked by site. "+
			"Costs are in the currency the drive models' prices are registered in.", from, to)}
	var sites []string
	bySite := map[string]map[string]float64{}
	for _, b := range f.Budget {
		if _, ok := bySite[b.Site]; !ok {
			sites = append(sites, b.Site)
			bySite[b.Site] = map[string]float64{}
		}
		bySite[b.Site][b.Month] += b.TotalCost
	}
	slices.Sort(sites)
	spec := chart.BarSpec{Unit: "cost"}
	for _, m := range f.Months {
		spec.Categories = append(spec.Categories, monthLabel(m.Month))
	}
	if len(f.Months) > 36 {
		spec.LabelEvery = 12
	} else if len(f.Months) > 12 {
		spec.LabelEvery = 3
	}
	for i, s := range sites {
		st := chart.Stack{Name: s, Class: fmt.Sprintf("b-%d", i%6)}
		for _, m := range f.Months {
			st.Values = append(st.Values, bySite[s][m.Month])
		}
		spec.Stacks = append(spec.Stacks, st)
		cv.Legend = append(cv.Legend, legendItem{Name: s, Class: st.Class, Kind: "bar"})
	}
	layout := chart.Bars(spec)
	cv.Bars = &layout
	if layout.Empty {
		cv.Empty = fmt.Sprintf("No replacement is projected in the %d months from %s to %s.", f.HorizonMonths, from, to)
	}
	busy := 0
	peak := plan.BudgetRow{}
	for _, m := range f.Months {
		if m.TotalCost > 0 {
			busy++
		}
		if m.TotalCost > peak.TotalCost {
			peak = m
		}
	}
	e := f.Totals.Expected
	cv.Summary = append(cv.Summary, fmt.Sprintf("Expected cost over the %d months: %s, in %d month%s with work.", f.HorizonMonths,
		money(e.TotalCost), busy, plural(busy)))
	if peak.TotalCost > 0 {
		cv.Summary = append(cv.Summary, fmt.Sprintf("The costliest month is %s: %s.", monthLabel(peak.Month), money(peak.TotalCost)))
	}
	if len(sites) > 0 {
		var parts []string
		for _, s := range sites {
			sum := 0.0
			for _, v := range bySite[s] {
				sum += v
			}
			parts = append(parts, s+" "+money(sum))
		}
		cv.Summary = append(cv.Summary, "By site: "+strings.Join(parts, "; ")+".")
	}
	cv.Summary = append(cv.Summary, fmt.Sprintf("If every part reached the earlier end of its band the horizon would cost %s; at the later end, %s.",
		money(f.Totals.EarliestCase.TotalCost), money(f.Totals.LatestCase.TotalCost)))
	cv.Table.Head = append([]string{"Month"}, sites...)
	cv.Table.Head = append(cv.Table.Head, "All sites")
	for _, m := range f.Months {
		row := []string{monthLabel(m.Month)}
		for _, s := range sites {
			row = append(row, money(bySite[s][m.Month]))
		}
		cv.Table.Rows = append(cv.Table.Rows, append(row, money(m.TotalCost)))
	}
	return cv
}

// monthLabel writes a budget month ("2027-03") as "Mar 2027".
func monthLabel(m string) string {
	t, err := time.Parse("2006-01", m)
	if err != nil {
		return m
	}
	return t.Format("Jan 2006")
}

// money writes a cost as a whole number with grouped digits; the register
// does not name a currency.
func money(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "–"
	}
	return grouped(math.Round(v))
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}
