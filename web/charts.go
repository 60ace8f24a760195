package web

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"kelvard/store"
	"kelvard/web/chart"
)

// chartView is a chart with its text alternative: a summary in sentences
// and the plotted values in a table.
type chartView struct {
	ID      string
	Title   string
	Caption string
	Layout  chart.Layout
	// Bars or Prob, when set, draw a stacked bar chart or a Weibull
	// probability plot instead of the time series in Layout.
	Bars    *chart.BarLayout
	Prob    *chart.ProbLayout
	Legend  []legendItem
	Summary []string
	Table   dataTable
	// Empty says why nothing is drawn.
	Empty string
}

// legendItem names a line, area, reference line, bar part or plotted
// group (Kind "line", "area", "rule", "bar" or "marker") and its look;
// Marker is a marker's shape and Line whether a fitted line goes with it.
type legendItem struct {
	Name, Class, Kind string
	Marker            string
	Line              bool
}

// dataTable is a chart's values as a table.
type dataTable struct {
	Head []string
	Rows [][]string
}

// lifeHorizon is the furthest a life chart looks ahead.
const lifeHorizon = 15 * 365 * 24 * time.Hour

// lifeChart plots capacitor and fan life used since each part was fitted,
// from the daily assessment history, and the straight projection to the
// projected end of life.
func lifeChart(v store.DriveView, a store.Assessment, hist []store.AssessmentDay, now time.Time) chartView {
	cv := chartView{ID: "chart-life", Title: "Capacitor and fan life used",
		Caption: "Share of rated life used by the parts fitted now, from their fitting to today, and the projected end of life at the trailing-year rate (dashed)."}
	end := now.AddDate(1, 0, 0)
	for _, e := range []*time.Time{a.CapacitorEndOfLife, a.FanEndOfLife} {
		if e != nil && e.After(end) {
			end = *e
		}
	}
	if end.Sub(now) > lifeHorizon {
		end = now.Add(lifeHorizon)
	}
	type part struct {
		name, class string
		fitted      *store.Component
		used        float64
		eol         *time.Time
		hist        func(store.AssessmentDay) float64
	}
	parts := []part{
		{"Capacitors", "s-cap", v.Capacitor, a.CapacitorLifeUsedFraction, a.CapacitorEndOfLife, func(d store.AssessmentDay) float64 { return d.CapacitorLifeUsedFraction }},
		{"Fan", "s-fan", v.Fan, a.FanLifeUsedFraction, a.FanEndOfLife, func(d store.AssessmentDay) float64 { return d.FanLifeUsedFraction }},
	}
	spec := chart.Spec{Unit: "% of rated life", Min: 0, Max: 100, Now: now, To: end,
		Rules: []chart.Rule{{Label: "End of life", Value: 100, Class: "r-limit"}}}
	rows := map[time.Time][]string{}
	put := func(t time.Time, i int, s string) {
		r := rows[t]
		if r == nil {
			r = []string{"", ""}
		}
		r[i] = s
		rows[t] = r
	}
	start := now
	for i, pt := range parts {
		var pts []chart.Point
		if pt.fitted != nil {
			pts = append(pts, chart.Point{At: pt.fitted.InstalledAt, Value: 0})
			put(pt.fitted.InstalledAt, i, "0 % (fitted)")
			if pt.fitted.InstalledAt.Before(start) {
				start = pt.fitted.InstalledAt
			}
		}
		for _, d := range hist {
			day, err := time.Parse(time.DateOnly, d.Day)
			if err != nil || (pt.fitted != nil && day.Before(pt.fitted.InstalledAt)) {
				continue
			}
			pts = append(pts, chart.Point{At: day, Value: pt.hist(d) * 100})
		}
		pts = append(pts, chart.Point{At: a.At, Value: pt.used * 100})
		put(a.At, i, percent(pt.used)+" (latest assessment)")
		spec.Series = append(spec.Series, chart.Series{Name: pt.name + ", life used", Class: pt.class, Points: pts, Markers: len(pts) < 40})
		cv.Legend = append(cv.Legend, legendItem{Name: pt.name + ", life used", Class: pt.class, Kind: "line"})
		sentence := fmt.Sprintf("%s: %s of rated life used at the latest assessment (%s)", pt.name, percent(pt.used), date(a.At))
		switch {
		case pt.used >= 1:
			sentence += "; the end of life has been reached."
		case pt.eol != nil && pt.eol.After(a.At):
			proj := []chart.Point{{At: a.At, Value: pt.used * 100}, {At: *pt.eol, Value: 100}}
			if pt.eol.After(end) {
				frac := float64(end.Sub(a.At)) / float64(pt.eol.Sub(a.At))
				proj[1] = chart.Point{At: end, Value: pt.used*100 + frac*(100-pt.used*100)}
				sentence += fmt.Sprintf("; projected to reach the end of life on %s, beyond this chart.", date(*pt.eol))
			} else {
				sentence += fmt.Sprintf("; projected to reach the end of life on %s.", date(*pt.eol))
			}
			put(*pt.eol, i, "100 % (projected end of life)")
			spec.Series = append(spec.Series, chart.Series{Name: pt.name + ", projection", Class: pt.class + " proj", Points: proj})
			cv.Legend = append(cv.Legend, legendItem{Name: pt.name + ", projection", Class: pt.class + " proj", Kind: "line"})
		default:
			sentence += "; no end of life can be projected yet."
		}
		cv.Summary = append(cv.Summary, sentence)
	}
	spec.From = start
	if !spec.From.Before(spec.To) {
		spec.From = spec.To.AddDate(-1, 0, 0)
	}
	cv.Legend = append(cv.Legend, legendItem{Name: "End of life (100 %)", Class: "r-limit", Kind: "rule"})
	cv.Layout = chart.Lay(spec)
	cv.Table.Head = []string{"Date", "Capacitors", "Fan"}
	times := make([]time.Time, 0, len(rows))
	for t := range rows {
		times = append(times, t)
	}
	slices.SortFunc(times, func(x, y time.Time) int { return x.Compare(y) })
	for _, t := range times {
		cv.Table.Rows = append(cv.Table.Rows, append([]string{date(t)}, rows[t]...))
	}
	return cv
}

// readingCharts plots the readings of a range: temperatures, current
// against the allowed current, and the DC bus.
func readingCharts(v store.DriveView, a *store.Assessment, d *deratingView, hist []store.AssessmentDay, buckets []store.ReadingBucket,
	from, to time.Time, rangeLabel string, u Units) []chartView {
	when := func(t time.Time) string { return t.UTC().Format("2 Jan 15:04") }
	if len(buckets) > 1 && buckets[1].Start.Sub(buckets[0].Start) >= 24*time.Hour {
		when = date
	}
	empty := "No readings in the last " + rangeLabel + "."
	val := func(p *float64, conv func(float64) float64) float64 {
		if p == nil {
			return math.NaN()
		}
		return conv(*p)
	}
	ident := func(x float64) float64 { return x }
	type line struct {
		name, class string
		get         func(store.ReadingBucket) *float64
		conv        func(float64) float64
		unit        func(float64) string
	}
	build := func(cv chartView, spec chart.Spec, lines []line) chartView {
		spec.From, spec.To = from, to
		cv.Table.Head = []string{"Interval starting"}
		for _, l := range lines {
			var pts []chart.Point
			var vals []float64
			var last chart.Point
			for _, b := range buckets {
				x := val(l.get(b), l.conv)
				pts = append(pts, chart.Point{At: b.Start, Value: x})
				if !math.IsNaN(x) {
					vals = append(vals, x)
					last = chart.Point{At: b.Start, Value: x}
				}
			}
			spec.Series = append(spec.Series, chart.Series{Name: l.name, Class: l.class, Points: pts})
			cv.Legend = append(cv.Legend, legendItem{Name: l.name, Class: l.class, Kind: "line"})
			cv.Table.Head = append(cv.Table.Head, l.name)
			if len(vals) == 0 {
				if len(buckets) > 0 {
					cv.Summary = append(cv.Summary, l.name+": not logged in this range.")
				}
				continue
			}
			mean := 0.0
			for _, x := range vals {
				mean += x
			}
			mean /= float64(len(vals))
			cv.Summary = append(cv.Summary, fmt.Sprintf("%s: mean %s, lowest %s, highest %s, latest %s (%s).", l.name,
				l.unit(mean), l.unit(slices.Min(vals)), l.unit(slices.Max(vals)), l.unit(last.Value), when(last.At)))
		}
		for _, r := range spec.Rules {
			cv.Legend = append(cv.Legend, legendItem{Name: r.Label, Class: r.Class, Kind: "rule"})
		}
		for _, r := range spec.Ranges {
			cv.Legend = append(cv.Legend, legendItem{Name: r.Name, Class: r.Class, Kind: "area"})
		}
		for _, b := range buckets {
			row := []string{when(b.Start)}
			for _, l := range lines {
				x := val(l.get(b), l.conv)
				if math.IsNaN(x) {
					row = append(row, "–")
				} else {
					row = append(row, l.unit(x))
				}
			}
			cv.Table.Rows = append(cv.Table.Rows, row)
		}
		cv.Layout = chart.Lay(spec)
		if len(buckets) == 0 || cv.Layout.Empty {
			cv.Empty = empty
		}
		return cv
	}
	temp := func(x float64) string { return trimNum(x, 1) + " " + u.TempUnit() }
	amps := func(x float64) string { return trimNum(x, 1) + " A" }
	volts := func(x float64) string { return trimNum(x, 0) + " V" }

	tSpec := chart.Spec{Unit: u.TempUnit(), Min: math.NaN(), Max: math.NaN()}
	if m := v.Model; m.RatedAmbientC > 0 {
		tSpec.Rules = append(tSpec.Rules, chart.Rule{Label: "Rated ambient " + u.Temp(m.RatedAmbientC), Value: u.TempValue(m.RatedAmbientC), Class: "r-rated"})
		if m.MaxAmbientC > m.RatedAmbientC {
			tSpec.Rules = append(tSpec.Rules, chart.Rule{Label: "Maximum ambient " + u.Temp(m.MaxAmbientC), Value: u.TempValue(m.MaxAmbientC), Class: "r-limit"})
		}
	}
	temps := build(chartView{ID: "chart-temp", Title: "Temperatures",
		Caption: "Mean air and heatsink temperatures per interval over the last " + rangeLabel + ", against the model's rated and maximum ambient."},
		tSpec, []line{
			{"Ambient air", "s-amb", func(b store.ReadingBucket) *float64 { return b.AmbientC }, u.TempValue, temp},
			{"Air inside", "s-int", func(b store.ReadingBucket) *float64 { return b.InternalAirC }, u.TempValue, temp},
			{"Heatsink", "s-hs", func(b store.ReadingBucket) *float64 { return b.HeatsinkC }, u.TempValue, temp},
		})

	cSpec := chart.Spec{Unit: "A", Min: 0, Max: math.NaN()}
	if a != nil && a.AllowedCurrentA != nil {
		cSpec.Rules = append(cSpec.Rules, chart.Rule{Label: "Allowed continuous " + amps(*a.AllowedCurrentA), Value: *a.AllowedCurrentA, Class: "r-limit"})
	}
	if d != nil && (a == nil || a.AllowedCurrentA == nil || math.Abs(d.RatedA-*a.AllowedCurrentA) > 0.05) {
		cSpec.Rules = append(cSpec.Rules, chart.Rule{Label: "Rated, " + string(d.Duty) + " duty " + amps(d.RatedA), Value: d.RatedA, Class: "r-rated"})
	}
	var allowed []chart.Point
	distinct := map[float64]bool{}
	for _, day := range hist {
		t, err := time.Parse(time.DateOnly, day.Day)
		if err != nil || day.AllowedCurrentA == nil || t.Before(from) {
			continue
		}
		allowed = append(allowed, chart.Point{At: t, Value: *day.AllowedCurrentA})
		distinct[*day.AllowedCurrentA] = true
	}
	if len(distinct) > 1 {
		// The allowed current changed in the range (a register change):
		// draw its daily values too.
		cSpec.Series = append(cSpec.Series, chart.Series{Name: "Allowed current by day", Class: "s-allowed", Points: allowed, Markers: true})
	}
	current := build(chartView{ID: "chart-current", Title: "Current against allowed current",
		Caption: "Mean and peak output current per interval over the last " + rangeLabel + ", against the continuous current allowed once derated."},
		cSpec, []line{
			{"Mean current", "s-cur", func(b store.ReadingBucket) *float64 { return b.CurrentA }, ident, amps},
			{"Peak current", "s-peak", func(b store.ReadingBucket) *float64 { return b.PeakCurrentA }, ident, amps},
		})
	if len(distinct) > 1 {
		current.Summary = append(current.Summary, "The allowed current changed in this range; its daily values are drawn as dots.")
		current.Legend = append(current.Legend, legendItem{Name: "Allowed current by day", Class: "s-allowed", Kind: "line"})
	}

	bSpec := chart.Spec{Unit: "V", Min: math.NaN(), Max: math.NaN()}
	if v.Position != nil && v.Position.Position.SupplyVoltageV > 0 {
		// Light-load DC bus ≈ √2 × line voltage (power electronics
		// handbooks; DESIGN.md section 3).
		exp := math.Sqrt2 * v.Position.Position.SupplyVoltageV
		bSpec.Rules = append(bSpec.Rules, chart.Rule{Label: "Expected at light load " + volts(exp), Value: exp, Class: "r-rated"})
	}
	if v.Model.BusTripV > 0 {
		bSpec.Rules = append(bSpec.Rules, chart.Rule{Label: "Over-voltage trip " + volts(v.Model.BusTripV), Value: v.Model.BusTripV, Class: "r-limit"})
	}
	var lo, hi []chart.Point
	for _, b := range buckets {
		lo = append(lo, chart.Point{At: b.Start, Value: val(b.BusMinV, ident)})
		hi = append(hi, chart.Point{At: b.Start, Value: val(b.BusMaxV, ident)})
	}
	bSpec.Ranges = []chart.Range{{Name: "Lowest to highest in the interval", Class: "a-bus", Low: lo, High: hi}}
	bus := build(chartView{ID: "chart-bus", Title: "DC-bus voltage",
		Caption: "Mean DC-bus voltage per interval over the last " + rangeLabel + ", with the interval's range shaded, against the expected light-load value and the trip level."},
		bSpec, []line{
			{"Mean bus voltage", "s-bus", func(b store.ReadingBucket) *float64 { return b.BusV }, ident, volts},
			{"Lowest in the interval", "s-buslo", func(b store.ReadingBucket) *float64 { return b.BusMinV }, ident, volts},
			{"Highest in the interval", "s-bushi", func(b store.ReadingBucket) *float64 { return b.BusMaxV }, ident, volts},
		})
	// The lowest and highest are drawn as the shaded range, not as lines.
	bus.Layout.Lines = slices.DeleteFunc(bus.Layout.Lines, func(l chart.Line) bool { return strings.HasPrefix(l.Class, "s-bus") && l.Class != "s-bus" })
	bus.Legend = slices.DeleteFunc(bus.Legend, func(l legendItem) bool { return l.Class == "s-buslo" || l.Class == "s-bushi" })
	return []chartView{temps, current, bus}
}
