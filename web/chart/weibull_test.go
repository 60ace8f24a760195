package chart

import (
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

func TestWeibullAxis(t *testing.T) {
	// Weibull paper's y = ln(−ln(1 − F)): at F = 1 − 1/e it is 0 (the
	// scale parameter's definition), at F = 1/2 it is ln(ln 2).
	for _, tc := range []struct{ f, y float64 }{
		{1 - 1/math.E, 0},
		{0.5, math.Log(math.Ln2)},
		{1 - math.Exp(-math.E), 1},
	} {
		if got := WeibullY(tc.f); math.Abs(got-tc.y) > 1e-12 {
			t.Errorf("WeibullY(%v) = %v, want %v", tc.f, got, tc.y)
		}
		if got := WeibullF(tc.y); math.Abs(got-tc.f) > 1e-12 {
			t.Errorf("WeibullF(%v) = %v, want %v", tc.y, got, tc.f)
		}
	}
}

// TestProbabilityLine checks that the fitted line drawn on the plot is the
// Weibull distribution: every point along it, read back through the axes,
// has the unreliability gonum's Weibull CDF gives at that age
// (gonum.org/v1/gonum/stat/distuv.Weibull, K = shape, Lambda = scale).
func TestProbabilityLine(t *testing.T) {
	for _, tc := range []struct{ shape, scale float64 }{{2.787, 2.13}, {1.108, 1225}, {3.5, 61000}, {0.8, 20000}} {
		pts := []ProbPoint{{AgeH: tc.scale * 0.4, F: 0.12}, {AgeH: tc.scale * 1.3, F: 0.7}}
		l := Probability(ProbSpec{Groups: []ProbGroup{{Name: "g", Points: pts, Shape: tc.shape, Scale: tc.scale}}})
		if l.Empty || len(l.Groups) != 1 || !l.Groups[0].Line {
			t.Fatalf("%+v: layout %+v", tc, l)
		}
		g := l.Groups[0]
		xLo, xHi := math.Log(l.XMin), math.Log(l.XMax)
		yLo, yHi := WeibullY(l.FMin), WeibullY(l.FMax)
		ageAt := func(px float64) float64 { return math.Exp(xLo + (px-l.Left)/(l.Right-l.Left)*(xHi-xLo)) }
		fAt := func(py float64) float64 { return WeibullF(yLo + (l.Base-py)/(l.Base-l.Top)*(yHi-yLo)) }
		w := distuv.Weibull{K: tc.shape, Lambda: tc.scale}
		for _, s := range []float64{0, 0.25, 0.5, 0.75, 1} {
			px, py := g.X1+s*(g.X2-g.X1), g.Y1+s*(g.Y2-g.Y1)
			age := ageAt(px)
			// Coordinates are rounded to 0.1 unit: compare on the y axis
			// within a unit.
			want := l.Base - (WeibullY(w.CDF(age))-yLo)/(yHi-yLo)*(l.Base-l.Top)
			if math.Abs(py-want) > 0.5 {
				t.Errorf("%+v: at %.4g h the line is at y %.1f (F %.4f), gonum's CDF %.4f puts it at %.1f", tc, age, py, fAt(py), w.CDF(age), want)
			}
		}
		// The line stays inside the plot.
		for _, v := range []float64{g.X1, g.X2} {
			if v < l.Left-0.05 || v > l.Right+0.05 {
				t.Errorf("%+v: line x %v outside [%v, %v]", tc, v, l.Left, l.Right)
			}
		}
		for _, v := range []float64{g.Y1, g.Y2} {
			if v < l.Top-0.05 || v > l.Base+0.05 {
				t.Errorf("%+v: line y %v outside [%v, %v]", tc, v, l.Top, l.Base)
			}
		}
		// The age axis covers the scale and whole decades.
		if l.XMin > tc.scale || l.XMax < tc.scale {
			t.Errorf("%+v: axis %v..%v misses the scale", tc, l.XMin, l.XMax)
		}
		if d := math.Log10(l.XMin); math.Abs(d-math.Round(d)) > 1e-9 {
			t.Errorf("age axis starts at %v, not a decade", l.XMin)
		}
		if strings.Count(g.Markers, "M") != 2 {
			t.Errorf("%+v: markers %q, want two", tc, g.Markers)
		}
	}
}

func TestProbabilityAxes(t *testing.T) {
	// Points only (too few failures for a fit): no line, the points placed
	// at ln t and ln(−ln(1 − F)).
	l := Probability(ProbSpec{Groups: []ProbGroup{
		{Name: "a", Points: []ProbPoint{{AgeH: 1500, F: 0.005}, {AgeH: 42000, F: 0.5}}},
		{Name: "b"},
	}})
	if l.Empty || l.Groups[0].Line || l.Groups[1].Markers != "" {
		t.Fatalf("layout %+v", l)
	}
	// F = 0.5 % lies below 1 %: the axis widens to the 0.5 % tick; the
	// ages span 1 000 h to 100 000 h.
	if l.FMin != 0.005 || l.FMax != 0.99 || l.XMin != 1000 || l.XMax != 100000 {
		t.Errorf("axes %v..%v h, F %v..%v", l.XMin, l.XMax, l.FMin, l.FMax)
	}
	if l.YTicks[0].Label != "0.5\u00a0%" || l.YTicks[0].Pos != round(l.Base) {
		t.Errorf("lowest tick %+v at base %v", l.YTicks[0], l.Base)
	}
	labels := []string{}
	for _, tk := range l.XTicks {
		labels = append(labels, tk.Label)
	}
	if strings.Join(labels, ",") != "1\u202f000,2\u202f000,5\u202f000,10\u202f000,20\u202f000,50\u202f000,100\u202f000" {
		t.Errorf("age ticks %q", labels)
	}
	// The 50 % point at 42 000 h: x at ln 42000 between the decade ends.
	wantX := l.Left + (l.Right-l.Left)*(math.Log(42000)-math.Log(1000))/(math.Log(100000)-math.Log(1000))
	if !strings.Contains(l.Groups[0].Markers, "M"+num(round(round(wantX)-3.6))+" ") {
		t.Errorf("markers %q, want one centred at x %v", l.Groups[0].Markers, round(wantX))
	}
	if !Probability(ProbSpec{}).Empty {
		t.Error("an empty plot is not empty")
	}
	for _, shape := range MarkerShapes {
		if p := MarkerPath(shape, 10, 10); !strings.HasPrefix(p, "M") || !strings.HasSuffix(p, "Z") {
			t.Errorf("marker %s: %q", shape, p)
		}
	}
}
