package chart

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// A Weibull probability plot ("Weibull paper") draws failures with
// x = ln t and y = ln(−ln(1 − F)), F the unreliability at age t. On these
// axes a two-parameter Weibull distribution F(t) = 1 − exp(−(t/η)^β) is
// the straight line y = β (ln t − ln η): slope β, crossing y = 0
// (F = 1 − 1/e ≈ 63.2 %) at t = η. The axes are labelled in hours and
// percent, not in the logarithms.

// WeibullY is the plot's y of an unreliability F in (0, 1).
func WeibullY(f float64) float64 { return math.Log(-math.Log1p(-f)) }

// WeibullF is the unreliability at the plot's y: the inverse of WeibullY.
func WeibullF(y float64) float64 { return -math.Expm1(-math.Exp(y)) }

// ProbSpec describes a Weibull probability plot: groups of plotted
// failures, each with its fitted line when it has one.
type ProbSpec struct {
	Groups []ProbGroup
}

// ProbGroup is one group's failures and fit.
type ProbGroup struct {
	Name string
	// Class names the group's colour and dash in the style sheet; Marker
	// is the shape of its points (MarkerShapes), so groups differ by more
	// than colour.
	Class  string
	Marker string
	// Points are the failures: age in hours and median rank F.
	Points []ProbPoint
	// Shape (β) and Scale (η, hours) of the fitted line; zero when the
	// group has no fit.
	Shape, Scale float64
}

// ProbPoint is one failure: its age in hours and its median rank.
type ProbPoint struct {
	AgeH float64
	F    float64
}

// MarkerShapes are the point shapes, in the order groups take them.
var MarkerShapes = []string{"circle", "square", "triangle", "diamond", "cross", "down"}

// ProbLayout is a probability plot ready to draw.
type ProbLayout struct {
	Width, Height          float64
	Left, Right, Top, Base float64
	XTicks, YTicks         []Tick
	Groups                 []ProbDrawn
	// XMin and XMax are the age axis's ends in hours; FMin and FMax the
	// unreliability axis's ends.
	XMin, XMax, FMin, FMax float64
	// Empty is true when there is neither a point nor a line to draw.
	Empty bool
}

// ProbDrawn is one group as drawn: its markers as one path, and the fitted
// line clipped to the plot (Line false when there is none).
type ProbDrawn struct {
	Name, Class, Marker string
	Markers             string
	Line                bool
	X1, Y1, X2, Y2      float64
}

// probTicks are the unreliabilities the y axis may mark.
var probTicks = []float64{0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.3, 0.5, 0.632, 0.8, 0.9, 0.95, 0.99, 0.999}

// Plot size of a probability plot: taller than a time series, since both
// axes carry information.
const (
	probHeight       = 380.0
	probMarginBottom = 40.0
	probMarginLeft   = 64.0
)

// Probability lays out a Weibull probability plot. The unreliability axis
// spans at least 1 % to 99 % and widens to the points; the age axis spans
// whole decades around the points and each fit's scale and B10 life.
func Probability(s ProbSpec) ProbLayout {
	l := ProbLayout{Width: Width, Height: probHeight, Left: probMarginLeft, Right: Width - marginRight, Top: marginTop, Base: probHeight - probMarginBottom}
	fLo, fHi := 0.01, 0.99
	tLo, tHi := math.Inf(1), math.Inf(-1)
	seeT := func(t float64) {
		if t > 0 && !math.IsInf(t, 0) {
			tLo, tHi = math.Min(tLo, t), math.Max(tHi, t)
		}
	}
	for _, g := range s.Groups {
		for _, p := range g.Points {
			if p.AgeH > 0 && p.F > 0 && p.F < 1 {
				seeT(p.AgeH)
				fLo, fHi = math.Min(fLo, p.F), math.Max(fHi, p.F)
			}
		}
		if g.Shape > 0 && g.Scale > 0 {
			seeT(g.Scale)
			// B10: the age at F = 10 %.
			seeT(g.Scale * math.Pow(-math.Log1p(-0.1), 1/g.Shape))
		}
	}
	if math.IsInf(tLo, 1) {
		l.Empty = true
		return l
	}
	// The unreliability axis ends on marked values.
	for i := len(probTicks) - 1; i >= 0; i-- {
		if probTicks[i] <= fLo {
			fLo = probTicks[i]
			break
		}
	}
	for _, v := range probTicks {
		if v >= fHi {
			fHi = v
			break
		}
	}
	dLo, dHi := math.Floor(math.Log10(tLo)), math.Ceil(math.Log10(tHi))
	if dHi <= dLo {
		dHi = dLo + 1
	}
	l.XMin, l.XMax, l.FMin, l.FMax = math.Pow(10, dLo), math.Pow(10, dHi), fLo, fHi
	xLo, xHi := math.Log(l.XMin), math.Log(l.XMax)
	yLo, yHi := WeibullY(fLo), WeibullY(fHi)
	px := func(lnT float64) float64 { return l.Left + (l.Right-l.Left)*(lnT-xLo)/(xHi-xLo) }
	py := func(y float64) float64 { return l.Base - (l.Base-l.Top)*(y-yLo)/(yHi-yLo) }
	decades := int(dHi - dLo)
	for d := dLo; d <= dHi; d++ {
		for _, m := range []float64{1, 2, 5} {
			t := m * math.Pow(10, d)
			if t > l.XMax*1.0001 {
				break
			}
			if m != 1 && decades > 2 {
				continue
			}
			tk := Tick{Pos: round(px(math.Log(t))), Label: hoursLabel(t), Anchor: "middle"}
			switch {
			case tk.Pos > l.Right-30:
				tk.Anchor = "end"
			case tk.Pos < l.Left+20:
				tk.Anchor = "start"
			}
			l.XTicks = append(l.XTicks, tk)
		}
	}
	for _, f := range probTicks {
		if f >= fLo && f <= fHi {
			l.YTicks = append(l.YTicks, Tick{Pos: round(py(WeibullY(f))), Label: percentLabel(f)})
		}
	}
	for i, g := range s.Groups {
		d := ProbDrawn{Name: g.Name, Class: g.Class, Marker: g.Marker}
		if d.Marker == "" {
			d.Marker = MarkerShapes[i%len(MarkerShapes)]
		}
		var b strings.Builder
		for _, p := range g.Points {
			if !(p.AgeH > 0 && p.F > 0 && p.F < 1) {
				continue
			}
			b.WriteString(markerPath(d.Marker, round(px(math.Log(p.AgeH))), round(py(WeibullY(p.F)))))
		}
		d.Markers = strings.TrimSpace(b.String())
		if g.Shape > 0 && g.Scale > 0 {
			if x1, y1, x2, y2, ok := clipLine(g.Shape, math.Log(g.Scale), xLo, xHi, yLo, yHi); ok {
				d.Line = true
				d.X1, d.Y1, d.X2, d.Y2 = round(px(x1)), round(py(y1)), round(px(x2)), round(py(y2))
			}
		}
		l.Groups = append(l.Groups, d)
	}
	return l
}

// clipLine clips y = beta (x − x0) to the box [xLo, xHi] × [yLo, yHi] and
// returns the visible segment's ends (beta > 0, so the line rises).
func clipLine(beta, x0, xLo, xHi, yLo, yHi float64) (x1, y1, x2, y2 float64, ok bool) {
	yAt := func(x float64) float64 { return beta * (x - x0) }
	xAt := func(y float64) float64 { return x0 + y/beta }
	x1, x2 = xLo, xHi
	if yAt(x1) < yLo {
		x1 = xAt(yLo)
	}
	if yAt(x2) > yHi {
		x2 = xAt(yHi)
	}
	if x1 >= x2 {
		return 0, 0, 0, 0, false
	}
	return x1, yAt(x1), x2, yAt(x2), true
}

// markerPath draws one marker of the shape centred at (x, y) as a closed
// SVG subpath about 7 units across.
func markerPath(shape string, x, y float64) string {
	f := func(v float64) string { return strconv.FormatFloat(round(v), 'f', -1, 64) }
	const r = 3.6
	switch shape {
	case "square":
		return fmt.Sprintf("M%s %sh%sv%sh-%sZ ", f(x-r+0.5), f(y-r+0.5), f(2*r-1), f(2*r-1), f(2*r-1))
	case "triangle":
		return fmt.Sprintf("M%s %sL%s %sL%s %sZ ", f(x), f(y-r-0.6), f(x+r+0.4), f(y+r-0.4), f(x-r-0.4), f(y+r-0.4))
	case "down":
		return fmt.Sprintf("M%s %sL%s %sL%s %sZ ", f(x), f(y+r+0.6), f(x+r+0.4), f(y-r+0.4), f(x-r-0.4), f(y-r+0.4))
	case "diamond":
		return fmt.Sprintf("M%s %sL%s %sL%s %sL%s %sZ ", f(x), f(y-r-0.6), f(x+r+0.6), f(y), f(x), f(y+r+0.6), f(x-r-0.6), f(y))
	case "cross":
		a, b := 1.3, r+0.4
		return fmt.Sprintf("M%s %sh%sv%sh%sv%sh-%sv%sh-%sv-%sh-%sv-%sh%sZ ",
			f(x-a), f(y-b), f(2*a), f(b-a), f(b-a), f(2*a), f(b-a), f(b-a), f(2*a), f(b-a), f(b-a), f(2*a), f(b-a))
	}
	// A circle as two arcs.
	return fmt.Sprintf("M%s %sa%s %s 0 1 0 %s 0a%s %s 0 1 0 -%s 0Z ", f(x-r), f(y), f(r), f(r), f(2*r), f(r), f(r), f(2*r))
}

// MarkerPath draws one marker for a legend swatch.
func MarkerPath(shape string, x, y float64) string { return strings.TrimSpace(markerPath(shape, x, y)) }

// hoursLabel writes an axis age: whole hours with thin-space groups.
func hoursLabel(t float64) string {
	s := strconv.FormatFloat(t, 'f', -1, 64)
	if t < 1 || strings.Contains(s, ".") || strings.Contains(s, "e") {
		return strconv.FormatFloat(t, 'g', 3, 64)
	}
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteString("\u202f")
		}
		b.WriteRune(c)
	}
	return b.String()
}

// percentLabel writes an axis unreliability as a percentage.
func percentLabel(f float64) string {
	return strconv.FormatFloat(math.Round(f*1000)/10, 'f', -1, 64) + "\u00a0%"
}
