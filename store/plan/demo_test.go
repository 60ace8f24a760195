package plan

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/demo"
	"kelvard/store/storetest"
)

// demoNow is the reference time of testdata/demo.
var demoNow = time.Date(2026, 11, 30, 0, 0, 0, 0, time.UTC)

// TestDemoFleetPlan loads the demo fleet (seed 1), assesses it and plans:
// the forecast holds a 24-month budget, the main models have enough
// capacitor and fan failures for fits, spares fall short where the models
// keep none on hand, and the proposals are grouped orders with cautions.
func TestDemoFleetPlan(t *testing.T) {
	if testing.Short() {
		t.Skip("loads 700 000 readings")
	}
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		now := demoNow
		st := storetest.OpenWith(t, d, store.Options{Now: func() time.Time { return now }})
		ctx := t.Context()
		if err := demo.Generate(1, demoNow).Load(ctx, st, nil); err != nil {
			t.Fatal(err)
		}
		if _, err := jobs.NewAssessor(st, jobs.AssessConfig{Now: func() time.Time { return now }}).Assess(ctx, jobs.AssessOptions{}); err != nil {
			t.Fatal(err)
		}

		f, err := ForecastFor(ctx, st, Config{})
		if err != nil {
			t.Fatal(err)
		}
		if f.HorizonMonths != 24 || len(f.Months) != 24 || f.Months[0].Month != "2026-11" || f.Months[23].Month != "2028-10" {
			t.Errorf("forecast months %d from %s", len(f.Months), f.Months[0].Month)
		}
		if f.Totals.Expected.TotalCost <= 0 || len(f.Budget) == 0 || f.Totals.EarliestCase.TotalCost < f.Totals.Expected.TotalCost {
			t.Errorf("budget totals %+v", f.Totals)
		}
		t.Logf("%s: %d forecast items, expected %.0f (earliest case %.0f, latest %.0f)", d, len(f.Items),
			f.Totals.Expected.TotalCost, f.Totals.EarliestCase.TotalCost, f.Totals.LatestCase.TotalCost)

		rel, err := ReliabilityFor(ctx, st, Config{})
		if err != nil {
			t.Fatal(err)
		}
		for _, model := range []string{"KV-400-11", "KV-400-11X"} {
			for _, mode := range []string{"dc_bus_capacitors", "cooling_fan"} {
				g := findGroup(t, rel, DimensionModel, model, mode)
				if g.Fit == nil || g.Failures < 3 || !(g.Fit.Shape > 0) || g.Fit.B10H <= 0 || len(g.Plot) != g.Failures {
					t.Errorf("%s %s: %d failures, fit %v (%s)", model, mode, g.Failures, g.Fit, g.Note)
					continue
				}
				t.Logf("%s %s: %d failures, %d suspensions, shape %.2f, scale %.0f h, B10 %.0f h, expected %.2f",
					model, mode, g.Failures, g.Suspensions, g.Fit.Shape, g.Fit.Scale, g.Fit.B10H, *g.ExpectedFailures)
			}
		}
		insufficient := 0
		for _, g := range rel.Groups {
			if g.Status == health.WeibullInsufficient && g.Fit == nil && strings.Contains(g.Note, "too few failures") {
				insufficient++
			}
		}
		if insufficient == 0 {
			t.Error("no group says it has too few failures")
		}
		short := 0
		for _, s := range rel.Spares {
			want := 0
			for _, l := range s.Levels {
				want = max(want, l.Hold-s.SparesOnHand)
			}
			if s.Shortfall != want || len(s.Levels) != 2 {
				t.Errorf("%s: shortfall %d, want %d from %+v", s.Model, s.Shortfall, want, s.Levels)
			}
			if s.Shortfall > 0 && s.SparesOnHand == 0 && s.RunningUnits > 0 {
				short++
			}
			if s.Model == "KV-400-11" && s.Shortfall == 0 {
				t.Errorf("KV-400-11 keeps no spares against demand %.2f and shows no shortfall", s.ExpectedDemand)
			}
			t.Logf("spares %s: demand %.3f, on hand %d, hold %d/%d, shortfall %d", s.Model, s.ExpectedDemand, s.SparesOnHand,
				s.Levels[0].Hold, s.Levels[1].Hold, s.Shortfall)
		}
		if short < 2 {
			t.Errorf("%d models short of spares, want the models that keep none", short)
		}
		if len(rel.Backtest.Failures) == 0 || rel.Backtest.Reading == "" {
			t.Errorf("backtest %+v", rel.Backtest)
		}

		res, _, err := Refresh(ctx, st, Config{})
		if err != nil {
			t.Fatal(err)
		}
		orders, err := st.AllWorkOrders(ctx, map[string]string{"status": "open"})
		if err != nil {
			t.Fatal(err)
		}
		grouped := 0
		for _, o := range orders {
			drives := map[int64]bool{}
			for _, l := range o.Lines {
				drives[l.DriveID] = true
			}
			if len(drives) > 1 {
				grouped++
			}
			if o.Status != store.OrderProposed || o.Caution != health.SafetyCaution || len(o.Lines) == 0 {
				t.Errorf("order %d: %s, %d lines, caution %q", o.ID, o.Status, len(o.Lines), o.Caution)
			}
		}
		if res.Proposed == 0 || len(orders) == 0 || grouped == 0 {
			t.Errorf("planning %+v: %d orders, %d covering several drives", res, len(orders), grouped)
		}
		var buf bytes.Buffer
		if err := WorkOrdersTable(&buf, orders); err != nil || !strings.Contains(buf.String(), "Caution:") {
			t.Errorf("table: %v", err)
		}
		t.Logf("%s: %+v; %d open orders, %d cover several drives", d, res, len(orders), grouped)
		again, _, err := Refresh(ctx, st, Config{})
		if err != nil || again.Proposed != 0 || again.Withdrawn != 0 {
			t.Errorf("second planning run %+v %v", again, err)
		}
	})
}
