package web

import (
	"fmt"
	"math"
	"net/http"
	"slices"
	"strings"

	"kelvard/health"
	"kelvard/store/plan"
	"kelvard/web/chart"
)

// plotGroupsMax is the most groups one probability plot draws: beyond it
// markers and dashes repeat and the plot stops being readable.
const plotGroupsMax = 8

// reliabilityPage is the fleet's failure statistics: Weibull fits of the
// chosen grouping and failure mode with their probability plot, every
// fit in a table, the spares per model and the backtest of the capacitor
// life model.
type reliabilityPage struct {
	R         plan.Reliability
	Dimension string
	Mode      string
	ModeName  string
	// DimensionName names the grouping in words.
	DimensionName string
	Dimensions    []choiceCount
	Modes         []choiceCount
	// Groups are the fits of the chosen dimension and mode.
	Groups []plan.GroupFit
	Plot   chartView
	Spares []sparesView
	// Confidence is the bounds' two-sided level as a percentage.
	Confidence string
	// Levels are the spares' service levels as percentages.
	Levels []string
}

// sparesView is one model's spares with its plans at the service levels.
type sparesView struct {
	plan.SparesRow
	Plans []health.SparesPlan
}

// dimensionLabels name the groupings for people.
var dimensionLabels = map[string]string{
	plan.DimensionFleet:       "the whole fleet",
	plan.DimensionModel:       "drive model",
	plan.DimensionEnvironment: "environment class (location / ISA-71.04 level)",
}

// reliability shows the fleet statistics.
func (h *Handler) reliability(w http.ResponseWriter, r *http.Request) {
	q := r.URL.Query()
	dim, mode := q.Get("dimension"), q.Get("mode")
	if dim == "" {
		dim = plan.DimensionModel
	}
	if mode == "" {
		mode = string(health.FailureCapacitors)
	}
	if _, ok := dimensionLabels[dim]; !ok {
		h.errorPage(w, r, http.StatusBadRequest, "Group by the fleet, the drive model or the environment class.")
		return
	}
	if mode != plan.ModeAny && !health.FailureMode(mode).Valid() {
		h.errorPage(w, r, http.StatusBadRequest, "That failure mode is not one kelvard knows.")
		return
	}
	rel, err := plan.ReliabilityFor(r.Context(), h.st, plan.Config{})
	if err != nil {
		h.fail(w, r, err)
		return
	}
	p := reliabilityPage{R: rel, Dimension: dim, Mode: mode, ModeName: modeLabel(mode), DimensionName: dimensionLabels[dim],
		Confidence: trimNum(rel.Settings.Confidence*100, 1) + "\u00a0%"}
	for _, d := range []string{plan.DimensionFleet, plan.DimensionModel, plan.DimensionEnvironment} {
		p.Dimensions = append(p.Dimensions, choiceCount{Key: d, Label: dimensionLabels[d], Current: d == dim})
	}
	for _, m := range append(health.FailureModes(), plan.ModeAny) {
		p.Modes = append(p.Modes, choiceCount{Key: string(m), Label: modeLabel(string(m)), Current: string(m) == mode})
	}
	for _, g := range rel.Groups {
		if g.Dimension == dim && g.Mode == mode {
			p.Groups = append(p.Groups, g)
		}
	}
	for _, l := range rel.Settings.ServiceLevels {
		p.Levels = append(p.Levels, trimNum(l*100, 1)+"\u00a0%")
	}
	for _, s := range rel.Spares {
		sv := sparesView{SparesRow: s}
		for _, l := range rel.Settings.ServiceLevels {
			i := slices.IndexFunc(s.Levels, func(sp health.SparesPlan) bool { return math.Abs(sp.ServiceLevel-l) < 1e-9 })
			if i >= 0 {
				sv.Plans = append(sv.Plans, s.Levels[i])
			} else {
				sv.Plans = append(sv.Plans, health.SparesPlan{})
			}
		}
		p.Spares = append(p.Spares, sv)
	}
	p.Plot = probabilityChart(p.Groups, dim, p.ModeName, p.Confidence)
	h.render(w, r, http.StatusOK, "reliability", "Fleet reliability", "reliability", p)
}

// probabilityChart draws the failures of each group on Weibull paper with
// its fitted line, with the points and fits as a table and each group's
// fit in a sentence.
func probabilityChart(groups []plan.GroupFit, dim, mode, confidence string) chartView {
	cv := chartView{ID: "chart-weibull", Title: "Weibull probability plot: " + mode + " by " + dimensionLabels[dim],
		Caption: "Each failure at its age and median rank (Benard's approximation, with Johnson's adjusted ranks where units are still running), " +
			"on axes where a Weibull distribution is a straight line: age on a log scale against ln(−ln(1 − F)). " +
			"The lines are the maximum-likelihood fits, which count the suspensions too."}
	spec := chart.ProbSpec{}
	drawn := 0
	for _, g := range groups {
		if len(g.Plot) == 0 && g.Fit == nil {
			if g.Lives > 0 {
				cv.Summary = append(cv.Summary, fmt.Sprintf("%s: no failures among %d lives; nothing to draw.", g.Group, g.Lives))
			}
			continue
		}
		if drawn == plotGroupsMax {
			cv.Summary = append(cv.Summary, fmt.Sprintf("%s: not drawn (the plot shows %d groups at most); see the fits table.", g.Group, plotGroupsMax))
			continue
		}
		pg := chart.ProbGroup{Name: g.Group, Class: fmt.Sprintf("g-%d", drawn), Marker: chart.MarkerShapes[drawn%len(chart.MarkerShapes)]}
		for _, pt := range g.Plot {
			pg.Points = append(pg.Points, chart.ProbPoint{AgeH: pt.AgeH, F: pt.MedianRank})
		}
		sentence := fmt.Sprintf("%s: %d failure%s and %d suspension%s", g.Group, g.Failures, plural(g.Failures), g.Suspensions, plural(g.Suspensions))
		if g.Fit != nil {
			pg.Shape, pg.Scale = g.Fit.Shape, g.Fit.Scale
			sentence += fmt.Sprintf("; fitted shape %s (%s bounds %s to %s), scale %s, B10 life %s (%s to %s).",
				trimNum(g.Fit.Shape, 2), confidence, trimNum(g.Fit.ShapeBounds.Lower, 2), trimNum(g.Fit.ShapeBounds.Upper, 2),
				hoursShort(g.Fit.Scale), hoursShort(g.Fit.B10H), hoursShort(g.Fit.B10Bounds.Lower), hoursShort(g.Fit.B10Bounds.Upper))
		} else {
			sentence += "; " + g.Note + ", so the points are drawn without a line."
		}
		cv.Summary = append(cv.Summary, sentence)
		cv.Legend = append(cv.Legend, legendItem{Name: g.Group, Class: pg.Class, Kind: "marker", Marker: pg.Marker, Line: g.Fit != nil})
		spec.Groups = append(spec.Groups, pg)
		for _, pt := range g.Plot {
			cv.Table.Rows = append(cv.Table.Rows, []string{g.Group, hoursShort(pt.AgeH), trimNum(pt.Rank, 3), percent(pt.MedianRank),
				trimNum(pt.X, 3), trimNum(pt.Y, 3)})
		}
		drawn++
	}
	cv.Table.Head = []string{"Group", "Age at failure", "Adjusted rank", "Median rank F", "ln t", "ln(−ln(1 − F))"}
	layout := chart.Probability(spec)
	cv.Prob = &layout
	if layout.Empty {
		cv.Empty = "No failures of this mode in any group: nothing to plot."
	}
	return cv
}

// hoursShort writes hours as a grouped whole number with the unit.
func hoursShort(h float64) string {
	if math.IsNaN(h) || math.IsInf(h, 0) || h < 0 {
		return "–"
	}
	return grouped(math.Round(h)) + " h"
}

// groupNote is a fit's summary for the all-fits table.
func groupNote(g plan.GroupFit) string {
	if g.Fit == nil {
		return strings.TrimSpace(g.Note)
	}
	return fmt.Sprintf("shape %s, scale %s, B10 %s", trimNum(g.Fit.Shape, 2), hoursShort(g.Fit.Scale), hoursShort(g.Fit.B10H))
}
