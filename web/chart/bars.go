package chart

import (
	"math"
)

// BarSpec describes a stacked bar chart: one bar per category (a month,
// say), each bar made of the stacks' values for that category, the first
// stack at the bottom.
type BarSpec struct {
	// Unit labels the value axis.
	Unit       string
	Categories []string
	Stacks     []Stack
	// LabelEvery labels every n-th category on the axis (the first one
	// always); 0 chooses it so that about twelve labels fit.
	LabelEvery int
}

// Stack is one part of every bar (a site, say): one value per category.
// Zero, negative and NaN values draw nothing.
type Stack struct {
	Name string
	// Class names the part's look in the style sheet.
	Class  string
	Values []float64
}

// BarLayout is a stacked bar chart ready to draw, every coordinate in SVG
// user units.
type BarLayout struct {
	Width, Height          float64
	Left, Right, Top, Base float64
	Unit                   string
	XTicks, YTicks         []Tick
	Bars                   []Bar
	// Empty is true when no category has a positive value.
	Empty bool
}

// Bar is one category's bar.
type Bar struct {
	Label    string
	X, W     float64
	Total    float64
	Segments []Segment
}

// Segment is one stack's part of a bar, from Y (its top) down H units.
type Segment struct {
	Name, Class string
	Value       float64
	Y, H        float64
}

// Bars computes the layout of a stacked bar chart. The value axis starts
// at zero and ends at a round value above the tallest bar.
func Bars(s BarSpec) BarLayout {
	l := BarLayout{Width: Width, Height: Height, Left: marginLeft, Right: Width - marginRight, Top: marginTop, Base: Height - marginBottom, Unit: s.Unit}
	n := len(s.Categories)
	totals := make([]float64, n)
	for _, st := range s.Stacks {
		for i := 0; i < n && i < len(st.Values); i++ {
			if v := st.Values[i]; v > 0 && !math.IsInf(v, 0) {
				totals[i] += v
			}
		}
	}
	top := 0.0
	for _, t := range totals {
		top = math.Max(top, t)
	}
	if n == 0 || top <= 0 {
		l.Empty = true
		return l
	}
	ticks, ylo, yhi := NiceTicks(0, top, 5)
	y := func(v float64) float64 { return l.Base - (l.Base-l.Top)*(v-ylo)/(yhi-ylo) }
	for _, v := range ticks {
		l.YTicks = append(l.YTicks, Tick{Pos: round(y(v)), Label: FormatValue(v, ticks)})
	}
	slot := (l.Right - l.Left) / float64(n)
	w := slot * 0.72
	every := s.LabelEvery
	if every <= 0 {
		every = max(1, int(math.Ceil(float64(n)/12)))
	}
	for i, c := range s.Categories {
		cx := l.Left + slot*(float64(i)+0.5)
		b := Bar{Label: c, X: round(cx - w/2), W: round(w), Total: totals[i]}
		base := 0.0
		for _, st := range s.Stacks {
			if i >= len(st.Values) {
				continue
			}
			v := st.Values[i]
			if !(v > 0) || math.IsInf(v, 0) {
				continue
			}
			y0, y1 := y(base), y(base+v)
			b.Segments = append(b.Segments, Segment{Name: st.Name, Class: st.Class, Value: v, Y: round(y1), H: round(y0 - y1)})
			base += v
		}
		l.Bars = append(l.Bars, b)
		if i%every == 0 {
			// Labels centre under their bar; only one near the drawing's
			// edge is anchored inward, so labels never run into each other.
			tk := Tick{Pos: round(cx), Label: c, Anchor: "middle"}
			switch {
			case tk.Pos > l.Width-30:
				tk.Anchor = "end"
			case tk.Pos < 30:
				tk.Anchor = "start"
			}
			l.XTicks = append(l.XTicks, tk)
		}
	}
	return l
}
