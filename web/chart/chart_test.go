package chart

import (
	"math"
	"slices"
	"strings"
	"testing"
	"time"
)

func TestNiceTicks(t *testing.T) {
	for _, tc := range []struct {
		lo, hi float64
		want   []float64
	}{
		{0, 100, []float64{0, 25, 50, 75, 100}},
		{17.3, 44.9, []float64{10, 20, 30, 40, 50}},
		{541, 590, []float64{540, 560, 580, 600}},
		{0, 7.9, []float64{0, 2, 4, 6, 8}},
		{5, 5, []float64{4, 4.5, 5, 5.5, 6}},
		{-3.2, 2.1, []float64{-4, -2, 0, 2, 4}},
	} {
		got, lo, hi := NiceTicks(tc.lo, tc.hi, 5)
		if !slices.Equal(got, tc.want) || lo != got[0] || hi != got[len(got)-1] {
			t.Errorf("NiceTicks(%v, %v) = %v [%v, %v], want %v", tc.lo, tc.hi, got, lo, hi, tc.want)
		}
	}
}

func TestFormatValue(t *testing.T) {
	for _, tc := range []struct {
		v     float64
		ticks []float64
		want  string
	}{
		{25, []float64{0, 25, 50}, "25"},
		{4.5, []float64{4, 4.5, 5}, "4.5"},
		{0.25, []float64{0, 0.25}, "0.25"},
		{math.Copysign(0, -1), []float64{-2, 0, 2}, "0"},
	} {
		if got := FormatValue(tc.v, tc.ticks); got != tc.want {
			t.Errorf("FormatValue(%v) = %q, want %q", tc.v, got, tc.want)
		}
	}
}

func TestTimeTicks(t *testing.T) {
	t0 := time.Date(2026, 10, 31, 0, 0, 0, 0, time.UTC)
	week := TimeTicks(t0, t0.Add(7*24*time.Hour), 7)
	if len(week) != 8 || week[0].Label != "31 Oct" || week[1].Label != "1 Nov" {
		t.Errorf("a week: %v", week)
	}
	month := TimeTicks(t0, t0.AddDate(0, 0, 30), 7)
	for _, tk := range month {
		if tk.At.Weekday() != time.Monday {
			t.Errorf("weekly tick on %s", tk.At.Weekday())
		}
	}
	years := TimeTicks(time.Date(2014, 3, 1, 0, 0, 0, 0, time.UTC), time.Date(2041, 6, 1, 0, 0, 0, 0, time.UTC), 7)
	if len(years) == 0 || len(years) > 7 || years[0].Label != "2015" {
		t.Errorf("decades: %v", years)
	}
	day := TimeTicks(t0, t0.Add(24*time.Hour), 7)
	if len(day) == 0 || !strings.Contains(day[0].Label, ":") {
		t.Errorf("a day: %v", day)
	}
}

func TestLay(t *testing.T) {
	t0 := time.Date(2026, 11, 1, 0, 0, 0, 0, time.UTC)
	pts := []Point{{t0, 10}, {t0.Add(time.Hour), math.NaN()}, {t0.Add(2 * time.Hour), 20}, {t0.Add(3 * time.Hour), 30}}
	l := Lay(Spec{Unit: "A", Min: 0, Max: math.NaN(), Series: []Series{{Name: "I", Class: "s", Points: pts, Markers: true}},
		Rules: []Rule{{Label: "limit", Value: 40}}, Now: t0.Add(3 * time.Hour)})
	if l.Empty || len(l.Lines) != 1 {
		t.Fatalf("layout %+v", l)
	}
	// The NaN breaks the line: two moves, one line segment.
	d := l.Lines[0].D
	if strings.Count(d, "M") != 2 || strings.Count(d, "L") != 1 || len(l.Lines[0].Dots) != 3 {
		t.Errorf("path %q, dots %v", d, l.Lines[0].Dots)
	}
	// Ends of the axes: first point at the left, last at the right; the
	// value axis runs 0..40 so 10 sits a quarter up and the rule at the top.
	if !strings.HasPrefix(d, "M58 ") || !strings.Contains(d, "L702 ") {
		t.Errorf("path %q does not span the plot", d)
	}
	wantY := l.Base - (l.Base-l.Top)*0.25
	if !strings.HasPrefix(d, "M58 "+num(round(wantY))) {
		t.Errorf("first point at %q, want y %v", d, round(wantY))
	}
	if len(l.Rules) != 1 || l.Rules[0].Y != round(l.Top) {
		t.Errorf("rule %+v, top %v", l.Rules, l.Top)
	}
	if l.NowX != l.Right {
		t.Errorf("now at %v, want the right edge %v", l.NowX, l.Right)
	}
	if Lay(Spec{Min: math.NaN(), Max: math.NaN()}).Empty != true {
		t.Error("a chart without points is not empty")
	}
	// A range is a closed area.
	r := Lay(Spec{Min: math.NaN(), Max: math.NaN(), Ranges: []Range{{Low: pts[:1], High: []Point{{t0, 12}}}, {Low: []Point{{t0, 1}, {t0.Add(time.Hour), 2}}, High: []Point{{t0, 3}, {t0.Add(time.Hour), 4}}}}})
	if len(r.Areas) != 2 || !strings.HasSuffix(r.Areas[1].D, "Z") {
		t.Errorf("areas %+v", r.Areas)
	}
}
