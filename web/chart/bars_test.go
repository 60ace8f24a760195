package chart

import (
	"math"
	"testing"
)

func TestBars(t *testing.T) {
	l := Bars(BarSpec{Unit: "cost", Categories: []string{"Jan", "Feb", "Mar", "Apr"},
		Stacks: []Stack{
			{Name: "North", Class: "b-0", Values: []float64{100, 0, 250, math.NaN()}},
			{Name: "South", Class: "b-1", Values: []float64{300, 0, -5}},
		}})
	if l.Empty || len(l.Bars) != 4 {
		t.Fatalf("layout %+v", l)
	}
	// The axis runs 0 to 400 (NiceTicks of 0..400): the first bar, 400 in
	// all, reaches the top; North sits at the bottom, a quarter of it.
	if l.YTicks[0].Label != "0" || l.YTicks[len(l.YTicks)-1].Label != "400" {
		t.Errorf("value ticks %+v", l.YTicks)
	}
	b := l.Bars[0]
	if b.Total != 400 || len(b.Segments) != 2 || b.Segments[0].Name != "North" || b.Segments[1].Name != "South" {
		t.Fatalf("first bar %+v", b)
	}
	plot := l.Base - l.Top
	north, south := b.Segments[0], b.Segments[1]
	if math.Abs(north.H-plot/4) > 0.11 || math.Abs(north.Y+north.H-l.Base) > 0.11 {
		t.Errorf("North segment %+v, want a quarter of %v above the base %v", north, plot, l.Base)
	}
	if math.Abs(south.Y-l.Top) > 0.11 || math.Abs(south.Y+south.H-north.Y) > 0.11 {
		t.Errorf("South segment %+v does not sit on North (%v) and reach the top %v", south, north.Y, l.Top)
	}
	// Empty, negative and NaN values draw nothing.
	if len(l.Bars[1].Segments) != 0 || len(l.Bars[2].Segments) != 1 || len(l.Bars[3].Segments) != 0 {
		t.Errorf("segments %d %d %d", len(l.Bars[1].Segments), len(l.Bars[2].Segments), len(l.Bars[3].Segments))
	}
	// Bars stand in equal slots across the plot, in order.
	for i := 1; i < len(l.Bars); i++ {
		if l.Bars[i].X <= l.Bars[i-1].X+l.Bars[i-1].W {
			t.Errorf("bar %d overlaps bar %d", i, i-1)
		}
	}
	if len(l.XTicks) != 4 {
		t.Errorf("four categories, %d labels", len(l.XTicks))
	}
	// Twenty-four months: every second one labelled, twelve labels.
	cats := make([]string, 24)
	for i := range cats {
		cats[i] = "m"
	}
	if got := len(Bars(BarSpec{Categories: cats, Stacks: []Stack{{Values: []float64{1}}}}).XTicks); got != 12 {
		t.Errorf("24 months: %d labels, want 12", got)
	}
	if !Bars(BarSpec{Categories: []string{"Jan"}, Stacks: []Stack{{Values: []float64{0}}}}).Empty {
		t.Error("a chart of zeros is not empty")
	}
}
