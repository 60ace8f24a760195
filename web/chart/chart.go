// Package chart lays out small charts for server-rendered SVG: time series
// (Lay), stacked bars (Bars) and Weibull probability plots (Probability):
// scales, tick marks and path geometry. It draws nothing itself; the page
// templates turn a layout into SVG elements, so escaping stays with
// html/template.
package chart

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"
)

// Size of the drawing in SVG user units; the page scales it to its width.
const (
	Width        = 720.0
	Height       = 250.0
	marginLeft   = 58.0
	marginRight  = 18.0
	marginTop    = 30.0
	marginBottom = 34.0
)

// Point is one value at one time. A NaN value breaks the line.
type Point struct {
	At    time.Time
	Value float64
}

// Series is one line on a chart.
type Series struct {
	Name string
	// Class names the line's look in the style sheet (colour and dash, so
	// lines differ by more than colour).
	Class  string
	Points []Point
	// Markers draws a dot at every point (for sparse series).
	Markers bool
}

// Range is a shaded band between a low and a high value over time.
type Range struct {
	Name  string
	Class string
	Low   []Point
	High  []Point
}

// Rule is a horizontal reference line: a limit or a rating.
type Rule struct {
	Label string
	Value float64
	Class string
}

// Spec describes a chart to lay out.
type Spec struct {
	// Unit labels the value axis ("°C", "A", "%").
	Unit   string
	Series []Series
	Ranges []Range
	Rules  []Rule
	// From and To fix the time axis; zero values fit it to the data.
	From, To time.Time
	// Min and Max, when not NaN, are included in the value axis (0 and
	// 100 for a percentage, say).
	Min, Max float64
	// Now, when not zero, draws a vertical line marking the present.
	Now time.Time
}

// Layout is a chart ready to draw: every coordinate in SVG user units.
type Layout struct {
	Width, Height          float64
	Left, Right, Top, Base float64
	Unit                   string
	XTicks, YTicks         []Tick
	Lines                  []Line
	Areas                  []Area
	Rules                  []RuleLine
	// NowX is the x of the present (0 when not drawn).
	NowX float64
	// Empty is true when there was nothing to plot.
	Empty bool
}

// Tick is one labelled mark on an axis at Pos (x for the time axis, y for
// the value axis). Anchor is the label's text-anchor: "middle", or
// "start" and "end" near the edges so no label is cut off.
type Tick struct {
	Pos    float64
	Label  string
	Anchor string
}

// Line is a series drawn as a path, with optional marker dots.
type Line struct {
	Name, Class string
	D           string
	Dots        [][2]float64
}

// Area is a range drawn as a closed path.
type Area struct {
	Name, Class string
	D           string
}

// RuleLine is a reference line at height Y.
type RuleLine struct {
	Label, Class string
	Y            float64
}

// Lay computes the layout of a chart.
func Lay(s Spec) Layout {
	l := Layout{Width: Width, Height: Height, Left: marginLeft, Right: Width - marginRight, Top: marginTop, Base: Height - marginBottom, Unit: s.Unit}
	t0, t1 := s.From, s.To
	lo, hi := math.Inf(1), math.Inf(-1)
	n := 0
	see := func(p Point, timeOnly bool) {
		if !s.From.IsZero() && (p.At.Before(s.From) || p.At.After(s.To)) {
			return
		}
		if s.From.IsZero() {
			if t0.IsZero() || p.At.Before(t0) {
				t0 = p.At
			}
			if t1.IsZero() || p.At.After(t1) {
				t1 = p.At
			}
		}
		if timeOnly || math.IsNaN(p.Value) || math.IsInf(p.Value, 0) {
			return
		}
		lo, hi = math.Min(lo, p.Value), math.Max(hi, p.Value)
		n++
	}
	for _, se := range s.Series {
		for _, p := range se.Points {
			see(p, false)
		}
	}
	for _, r := range s.Ranges {
		for _, p := range r.Low {
			see(p, false)
		}
		for _, p := range r.High {
			see(p, false)
		}
	}
	if n == 0 {
		l.Empty = true
		return l
	}
	for _, r := range s.Rules {
		lo, hi = math.Min(lo, r.Value), math.Max(hi, r.Value)
	}
	if !math.IsNaN(s.Min) {
		lo = math.Min(lo, s.Min)
	}
	if !math.IsNaN(s.Max) {
		hi = math.Max(hi, s.Max)
	}
	if !t1.After(t0) {
		t0, t1 = t0.Add(-12*time.Hour), t1.Add(12*time.Hour)
	}
	ticks, ylo, yhi := NiceTicks(lo, hi, 5)
	x := func(t time.Time) float64 {
		return l.Left + (l.Right-l.Left)*float64(t.Sub(t0))/float64(t1.Sub(t0))
	}
	y := func(v float64) float64 { return l.Base - (l.Base-l.Top)*(v-ylo)/(yhi-ylo) }
	for _, v := range ticks {
		l.YTicks = append(l.YTicks, Tick{Pos: round(y(v)), Label: FormatValue(v, ticks)})
	}
	for _, t := range TimeTicks(t0, t1, 7) {
		tk := Tick{Pos: round(x(t.At)), Label: t.Label, Anchor: "middle"}
		switch {
		case tk.Pos > l.Right-40:
			tk.Anchor = "end"
		case tk.Pos < l.Left+30:
			tk.Anchor = "start"
		}
		l.XTicks = append(l.XTicks, tk)
	}
	inX := func(p Point) bool { return !p.At.Before(t0) && !p.At.After(t1) }
	for _, se := range s.Series {
		line := Line{Name: se.Name, Class: se.Class}
		var b strings.Builder
		pen := false
		for _, p := range se.Points {
			if !inX(p) || math.IsNaN(p.Value) || math.IsInf(p.Value, 0) {
				pen = false
				continue
			}
			cmd := "L"
			if !pen {
				cmd = "M"
			}
			px, py := round(x(p.At)), round(y(p.Value))
			fmt.Fprintf(&b, "%s%s %s ", cmd, num(px), num(py))
			pen = true
			if se.Markers {
				line.Dots = append(line.Dots, [2]float64{px, py})
			}
		}
		line.D = strings.TrimSpace(b.String())
		l.Lines = append(l.Lines, line)
	}
	for _, r := range s.Ranges {
		if len(r.Low) != len(r.High) || len(r.Low) == 0 {
			continue
		}
		var b strings.Builder
		first := true
		for _, p := range r.High {
			if !inX(p) || math.IsNaN(p.Value) {
				continue
			}
			cmd := "L"
			if first {
				cmd, first = "M", false
			}
			fmt.Fprintf(&b, "%s%s %s ", cmd, num(round(x(p.At))), num(round(y(p.Value))))
		}
		for i := len(r.Low) - 1; i >= 0; i-- {
			p := r.Low[i]
			if !inX(p) || math.IsNaN(p.Value) {
				continue
			}
			fmt.Fprintf(&b, "L%s %s ", num(round(x(p.At))), num(round(y(p.Value))))
		}
		if first {
			continue
		}
		b.WriteString("Z")
		l.Areas = append(l.Areas, Area{Name: r.Name, Class: r.Class, D: b.String()})
	}
	for _, r := range s.Rules {
		l.Rules = append(l.Rules, RuleLine{Label: r.Label, Class: r.Class, Y: round(y(r.Value))})
	}
	if !s.Now.IsZero() && !s.Now.Before(t0) && !s.Now.After(t1) {
		l.NowX = round(x(s.Now))
	}
	return l
}

func round(v float64) float64 { return math.Round(v*10) / 10 }

func num(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

// NiceTicks returns about n round tick values covering [lo, hi] (steps of
// 1, 2 or 5 times a power of ten) and the axis ends they span.
func NiceTicks(lo, hi float64, n int) (ticks []float64, axisLo, axisHi float64) {
	if hi < lo {
		lo, hi = hi, lo
	}
	if hi == lo {
		pad := math.Max(math.Abs(lo)*0.1, 1)
		lo, hi = lo-pad, hi+pad
	}
	raw := (hi - lo) / float64(max(n-1, 1))
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	step := mag * 10
	for _, m := range []float64{1, 2, 2.5, 5, 10} {
		if m*mag >= raw {
			step = m * mag
			break
		}
	}
	axisLo = math.Floor(lo/step) * step
	axisHi = math.Ceil(hi/step) * step
	for v := axisLo; v <= axisHi+step/2; v += step {
		ticks = append(ticks, math.Round(v/step)*step)
	}
	return ticks, axisLo, axisHi
}

// FormatValue writes a tick value with as many decimals as the step
// between ticks needs.
func FormatValue(v float64, ticks []float64) string {
	dec := 0
	if len(ticks) > 1 {
		step := math.Abs(ticks[1] - ticks[0])
		for dec < 4 && math.Abs(step*math.Pow(10, float64(dec))-math.Round(step*math.Pow(10, float64(dec)))) > 1e-9 {
			dec++
		}
	}
	if v == 0 {
		v = 0 // no "-0"
	}
	return strconv.FormatFloat(v, 'f', dec, 64)
}

// TimeTick is a labelled instant on the time axis.
type TimeTick struct {
	At    time.Time
	Label string
}

// TimeTicks returns at most about n ticks on round instants (hours, days,
// weeks, months or years, UTC) between t0 and t1, labelled to suit the span.
func TimeTicks(t0, t1 time.Time, n int) []TimeTick {
	t0, t1 = t0.UTC(), t1.UTC()
	span := t1.Sub(t0)
	type unit struct {
		step   time.Duration
		months int
		layout string
	}
	units := []unit{
		{step: time.Hour, layout: "15:04"},
		{step: 3 * time.Hour, layout: "15:04"},
		{step: 6 * time.Hour, layout: "2 Jan 15:04"},
		{step: 12 * time.Hour, layout: "2 Jan 15:04"},
		{step: 24 * time.Hour, layout: "2 Jan"},
		{step: 2 * 24 * time.Hour, layout: "2 Jan"},
		{step: 7 * 24 * time.Hour, layout: "2 Jan"},
		{step: 14 * 24 * time.Hour, layout: "2 Jan"},
		{months: 1, layout: "Jan 2006"},
		{months: 2, layout: "Jan 2006"},
		{months: 3, layout: "Jan 2006"},
		{months: 6, layout: "Jan 2006"},
		{months: 12, layout: "2006"},
		{months: 24, layout: "2006"},
		{months: 60, layout: "2006"},
		{months: 120, layout: "2006"},
	}
	pick := units[len(units)-1]
	for _, u := range units {
		approx := u.step
		if u.months > 0 {
			approx = time.Duration(u.months) * 30 * 24 * time.Hour
		}
		if span/approx <= time.Duration(n) {
			pick = u
			break
		}
	}
	var out []TimeTick
	if pick.months == 0 {
		start := t0.Truncate(pick.step)
		if pick.step >= 7*24*time.Hour {
			// Weeks start on Mondays.
			start = time.Date(t0.Year(), t0.Month(), t0.Day(), 0, 0, 0, 0, time.UTC)
			for start.Weekday() != time.Monday {
				start = start.AddDate(0, 0, -1)
			}
		}
		for t := start; !t.After(t1); t = t.Add(pick.step) {
			if !t.Before(t0) {
				out = append(out, TimeTick{At: t, Label: t.Format(pick.layout)})
			}
		}
		return out
	}
	m := (t0.Year()*12 + int(t0.Month()) - 1) / pick.months * pick.months
	for {
		t := time.Date(m/12, time.Month(m%12+1), 1, 0, 0, 0, 0, time.UTC)
		if t.After(t1) {
			return out
		}
		if !t.Before(t0) {
			out = append(out, TimeTick{At: t, Label: t.Format(pick.layout)})
		}
		m += pick.months
	}
}
