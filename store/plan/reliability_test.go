package plan

import (
	"context"
	"math"
	"strings"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// The published check cases of health/weibull_test.go, rebuilt here as
// register history so the fits run through the grouping code:
//
//   - the NAG Library Manual, g07be example (20 uncensored observations;
//     NAG reports shape γ = 2.7870 and log λ = −2.1073 for
//     S(x) = exp(−λ x^γ), so scale λ^(−1/γ) ≈ 2.1300), here in thousands
//     of hours of service before a power-module failure;
//   - R's survival::ovarian data (Edmonson et al., 1979; 12 deaths, 14
//     censored; survreg(Surv(futime, fustat) ~ 1, dist = "weibull") gives
//     Intercept 7.111 and Scale 0.902: shape 1/0.902 ≈ 1.108, scale
//     exp(7.111) ≈ 1225), here as hours of capacitor-bank age.
var nagG07be = []float64{1.1, 1.4, 1.3, 1.7, 1.9, 1.8, 1.6, 2.2, 1.7, 2.7,
	4.1, 1.8, 1.5, 1.2, 1.4, 3.0, 1.7, 2.3, 1.6, 2.0}

var ovarianFutime = []float64{59, 115, 156, 421, 431, 448, 464, 475, 477, 563, 638, 744, 769,
	770, 803, 855, 1040, 1106, 1129, 1206, 1227, 268, 329, 353, 365, 377}

var ovarianFustat = []int{1, 1, 1, 0, 1, 0, 1, 1, 0, 1, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 0}

// relT0 is the start of the reliability histories; relNow the store's clock.
var (
	relT0  = time.Date(2020, 1, 1, 0, 0, 0, 0, time.UTC)
	relNow = relT0.AddDate(0, 0, 3000)
)

// lifeRig builds a register with the two published data sets as history:
// model OV in an indoor G1 hall, one drive per ovarian patient, its
// capacitor bank fitted at relT0 and the drive retired at futime hours,
// failed by its capacitors where fustat is 1; model NG on an outdoor G3
// deck, one drive per NAG observation, installed at relT0 and failing by
// its power module after the observation × 1000 hours in service. Model SP
// has six drives in service and no failures: its spares come from the
// fleet's fits.
type lifeRig struct {
	*rig
	hall, deck store.Area
	ov, ng, sp store.DriveModel
	spAges     []float64
	ovDrives   []store.Drive
}

func newLifeRig(t *testing.T, d store.Dialect) *lifeRig {
	t.Helper()
	r := &rig{t: t, now: relNow, ctx: context.Background()}
	r.st = storetest.OpenWith(t, d, store.Options{Now: func() time.Time { return r.now }})
	lr := &lifeRig{rig: r}
	site, err := store.Create[store.Site](r.ctx, r.st, func(v *store.Site) error { v.Name = "Works"; return nil })
	r.must(err)
	lr.hall, err = store.Create[store.Area](r.ctx, r.st, func(v *store.Area) error { v.SiteID, v.Name = site.ID, "Hall"; return nil })
	r.must(err)
	lr.deck, err = store.Create[store.Area](r.ctx, r.st, func(v *store.Area) error {
		v.SiteID, v.Name = site.ID, "Deck"
		v.Environment.Location, v.Environment.Sun, v.Environment.Corrosion = health.Outdoor, health.SunFull, health.CorrosionG3
		return nil
	})
	r.must(err)
	newModel := func(name string, onHand int) store.DriveModel {
		m, err := store.Create[store.DriveModel](r.ctx, r.st, func(v *store.DriveModel) error {
			v.Name, v.VoltageClassV = name, 480
			v.NormalDutyCurrentA, v.NormalDutyPowerKW, v.HeavyDutyCurrentA, v.HeavyDutyPowerKW = 23, 11, 18, 7.5
			v.Enclosure = store.EnclosureSpec{NEMAType: "4X", IPCode: "IP66"}
			v.LeadTimeDays, v.SparesOnHand = 42, onHand
			return nil
		})
		r.must(err)
		return m
	}
	lr.ov, lr.ng, lr.sp = newModel("OV", 0), newModel("NG", 0), newModel("SP", 1)
	place := func(serial string, m store.DriveModel, area store.Area, made, installed time.Time) (store.Drive, int64) {
		p, err := store.Create[store.Position](r.ctx, r.st, func(v *store.Position) error {
			v.AreaID, v.Tag, v.SupplyVoltageV = area.ID, "P-"+serial, 400
			return nil
		})
		r.must(err)
		dr, err := store.Create[store.Drive](r.ctx, r.st, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID, v.ManufacturedAt = serial, m.ID, site.ID, made
			return nil
		})
		r.must(err)
		_, err = r.st.MoveDrive(r.ctx, dr.ID, store.Move{PositionID: &p.ID, At: installed})
		r.must(err)
		return dr, p.ID
	}
	for i, h := range ovarianFutime {
		dr, pos := place("OV-"+itoa64(int64(i+1)), lr.ov, lr.hall, relT0, relT0)
		at := relT0.Add(time.Duration(h) * time.Hour)
		if ovarianFustat[i] == 1 {
			r.failure(dr.ID, &pos, at, health.FailureCapacitors)
		}
		_, err := r.st.MoveDrive(r.ctx, dr.ID, store.Move{At: at, Status: health.StatusRetired})
		r.must(err)
		lr.ovDrives = append(lr.ovDrives, dr)
	}
	for i, x := range nagG07be {
		dr, pos := place("NG-"+itoa64(int64(i+1)), lr.ng, lr.deck, relT0.AddDate(0, 0, -30), relT0)
		at := relT0.Add(time.Duration(math.Round(x*1000)) * time.Hour)
		r.failure(dr.ID, &pos, at, health.FailurePowerModule)
		_, err := r.st.MoveDrive(r.ctx, dr.ID, store.Move{At: at, Status: health.StatusInRepair})
		r.must(err)
	}
	for k := 1; k <= 6; k++ {
		age := float64(300 * k)
		installed := relNow.Add(-time.Duration(age) * time.Hour)
		place("SP-"+itoa64(int64(k)), lr.sp, lr.hall, installed.AddDate(0, 0, -10), installed)
		lr.spAges = append(lr.spAges, age)
	}
	return lr
}

func findGroup(t *testing.T, r Reliability, dim, group, mode string) GroupFit {
	t.Helper()
	for _, g := range r.Groups {
		if g.Dimension == dim && g.Group == group && g.Mode == mode {
			return g
		}
	}
	t.Fatalf("no group %s %s %s", dim, group, mode)
	return GroupFit{}
}

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

// TestGroupFitsReproducePublishedCases fits the groups built from the
// register history and checks them against the published values.
func TestGroupFitsReproducePublishedCases(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		lr := newLifeRig(t, d)
		rel, err := ReliabilityFor(lr.ctx, lr.st, Config{})
		lr.must(err)

		// R survival::ovarian through the model group and the indoor G1
		// environment class, in capacitor-bank age.
		for _, g := range []GroupFit{findGroup(t, rel, DimensionModel, "OV", "dc_bus_capacitors"),
			findGroup(t, rel, DimensionEnvironment, "indoor/G1", "dc_bus_capacitors")} {
			if g.Failures != 12 || g.AgeBasis != AgeComponent {
				t.Errorf("%s %s: %d failures (%s), want 12 in component age", g.Dimension, g.Group, g.Failures, g.AgeBasis)
			}
			if g.Dimension == DimensionModel && g.Suspensions != 14 {
				t.Errorf("model OV: %d suspensions, want 14", g.Suspensions)
			}
			if g.Fit == nil {
				t.Fatalf("%s %s: no fit: %s", g.Dimension, g.Group, g.Note)
			}
			if g.Dimension == DimensionModel && (!near(1/g.Fit.Shape, 0.902, 5e-4) || !near(math.Log(g.Fit.Scale), 7.111, 5e-4)) {
				t.Errorf("OV: survreg scale %.4f intercept %.4f; R gives 0.902 and 7.111", 1/g.Fit.Shape, math.Log(g.Fit.Scale))
			}
		}
		// NAG g07be through the model group and the outdoor G3 class, in
		// service hours.
		for _, g := range []GroupFit{findGroup(t, rel, DimensionModel, "NG", "power_module"),
			findGroup(t, rel, DimensionEnvironment, "outdoor/G3", "power_module")} {
			if g.Failures != 20 || g.Suspensions != 0 || g.AgeBasis != AgeService || g.Fit == nil {
				t.Fatalf("%s %s: %d failures, %d suspensions, %s, fit %v", g.Dimension, g.Group, g.Failures, g.Suspensions, g.AgeBasis, g.Fit)
			}
			logLambda := -g.Fit.Shape * math.Log(g.Fit.Scale/1000)
			if !near(g.Fit.Shape, 2.7870, 5e-5) || !near(logLambda, -2.1073, 5e-5) || !near(g.Fit.Scale/1000, 2.1300, 5e-5) {
				t.Errorf("%s: shape %.5f log λ %.5f scale %.5f kh; NAG g07be gives 2.7870, -2.1073, 2.1300", g.Group, g.Fit.Shape, logLambda, g.Fit.Scale/1000)
			}
			b := g.Fit.B10Bounds
			if !(b.Lower < g.Fit.B10H && g.Fit.B10H < b.Upper) || !near(g.Fit.B10H, g.Fit.BLife(0.1), 1e-9) {
				t.Errorf("B10 %v with bounds %+v", g.Fit.B10H, b)
			}
			// Without suspensions Johnson's ranks are the order numbers, so
			// the plot points are Benard's (i − 0.3)/(n + 0.4).
			if len(g.Plot) != 20 || !near(g.Plot[0].MedianRank, 0.7/20.4, 1e-12) || !near(g.Plot[19].MedianRank, 19.7/20.4, 1e-12) ||
				g.Plot[0].AgeH != 1100 || g.Plot[19].AgeH != 4100 {
				t.Errorf("plot points %+v … %+v", g.Plot[0], g.Plot[len(g.Plot)-1])
			}
			if g.RunningUnits != 0 || g.ExpectedFailures == nil || *g.ExpectedFailures != 0 {
				t.Errorf("%s: %d running, expected %v", g.Group, g.RunningUnits, g.ExpectedFailures)
			}
		}
		// A group with too few failures says so and prints no fit.
		sp := findGroup(t, rel, DimensionModel, "SP", "dc_bus_capacitors")
		if sp.Status != health.WeibullInsufficient || sp.Fit != nil || !strings.Contains(sp.Note, "too few failures") || sp.RunningUnits != 6 {
			t.Errorf("SP capacitors: %+v", sp)
		}
		// The fleet's capacitor group counts every bank: the ovarian ones
		// and the NG and SP banks as suspensions.
		fleet := findGroup(t, rel, DimensionFleet, "fleet", "dc_bus_capacitors")
		if fleet.Failures != 12 || fleet.Suspensions != 14+20+6 || fleet.Fit == nil {
			t.Errorf("fleet capacitors: %d failures, %d suspensions", fleet.Failures, fleet.Suspensions)
		}
		// Running units' expected failures in 12 months: Σ (1 − R(t+Δ)/R(t))
		// written out here from the Weibull survival function.
		fleetPM := findGroup(t, rel, DimensionFleet, "fleet", "power_module")
		want := 0.0
		for _, a := range lr.spAges {
			w := fleetPM.Fit
			want += 1 - math.Exp(math.Pow(a/w.Scale, w.Shape)-math.Pow((a+8766)/w.Scale, w.Shape))
		}
		if fleetPM.RunningUnits != 6 || fleetPM.ExpectedFailures == nil || !near(*fleetPM.ExpectedFailures, want, 1e-9) {
			t.Errorf("fleet power module: %d running, expected %v, want %v", fleetPM.RunningUnits, fleetPM.ExpectedFailures, want)
		}
	})
}

// TestSparesAgainstPoissonQuantile checks the spares of model SP: its
// demand over the 42-day lead time is the fleet fits' conditional failure
// probabilities summed over its six running units (it has too few failures
// of its own), and the spares to hold are the Poisson quantile computed
// with gonum's distuv.Poisson.
func TestSparesAgainstPoissonQuantile(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		lr := newLifeRig(t, d)
		rel, err := ReliabilityFor(lr.ctx, lr.st, Config{})
		lr.must(err)
		var row SparesRow
		for _, s := range rel.Spares {
			if s.Model == "SP" {
				row = s
			}
		}
		if row.RunningUnits != 6 || row.SparesOnHand != 1 || row.LeadTimeDays != 42 {
			t.Fatalf("spares row %+v", row)
		}
		leadH := 42 * 24.0
		cond := func(w *health.WeibullFit, age float64) float64 {
			return 1 - math.Exp(math.Pow(age/w.Scale, w.Shape)-math.Pow((age+leadH)/w.Scale, w.Shape))
		}
		// Capacitor age runs from fitting (ten days before installation),
		// service age from installation.
		pm := findGroup(t, rel, DimensionFleet, "fleet", "power_module").Fit
		capFit := findGroup(t, rel, DimensionFleet, "fleet", "dc_bus_capacitors").Fit
		want := 0.0
		for _, a := range lr.spAges {
			want += cond(pm, a) + cond(capFit, a+240)
		}
		if !near(row.ExpectedDemand, want, 1e-9*want) {
			t.Errorf("expected demand %.12g, want %.12g", row.ExpectedDemand, want)
		}
		for _, md := range row.Demand {
			switch md.Mode {
			case health.FailurePowerModule, health.FailureCapacitors:
				if !strings.Contains(md.Source, "fleet") {
					t.Errorf("%s demand from %q, want the fleet fit", md.Mode, md.Source)
				}
			default:
				if md.Demand != 0 || md.Source != "no failures recorded" {
					t.Errorf("%s: %+v", md.Mode, md)
				}
			}
		}
		if len(row.Levels) != 2 {
			t.Fatalf("levels %+v", row.Levels)
		}
		pois := distuv.Poisson{Lambda: want}
		for _, p := range row.Levels {
			hold := 0
			for pois.CDF(float64(hold)) < p.ServiceLevel {
				hold++
			}
			if p.Hold != hold || p.Shortfall != max(0, hold-1) || !near(p.OnHandLevel, pois.CDF(1), 1e-12) {
				t.Errorf("service level %.2f: hold %d shortfall %d on-hand level %.6f; gonum gives hold %d, on-hand level %.6f",
					p.ServiceLevel, p.Hold, p.Shortfall, p.OnHandLevel, hold, pois.CDF(1))
			}
		}
		if row.Shortfall != max(0, row.Levels[1].Hold-1) || row.Shortfall == 0 {
			t.Errorf("shortfall %d, want the 95 %% level's %d (and some)", row.Shortfall, row.Levels[1].Hold-1)
		}
	})
}

// TestBacktestReadsLifeUsedAtFailure gives three failed capacitor banks a
// daily assessment on or just before their failure date and one an
// assessment too old to count; the rest have none.
func TestBacktestReadsLifeUsedAtFailure(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		lr := newLifeRig(t, d)
		rel, err := ReliabilityFor(lr.ctx, lr.st, Config{})
		lr.must(err)
		bt := rel.Backtest
		if len(bt.Failures) != 12 || bt.Covered != 0 || bt.MedianLifeUsed != nil || !strings.Contains(bt.Reading, "No daily assessment covers") {
			t.Fatalf("backtest before any history: %+v", bt)
		}
		var failed []store.Drive
		for i, dr := range lr.ovDrives {
			if ovarianFustat[i] == 1 {
				failed = append(failed, dr)
			}
		}
		day := func(dr store.Drive, back time.Duration) string {
			h := ovarianFutime[indexOf(lr.ovDrives, dr)]
			return relT0.Add(time.Duration(h)*time.Hour - back).Format(time.DateOnly)
		}
		rows := []store.AssessmentDay{
			{DriveID: failed[3].ID, Day: day(failed[3], 0), CapacitorLifeUsedFraction: 0.5, HealthBand: health.BandWatch},
			{DriveID: failed[4].ID, Day: day(failed[4], 48*time.Hour), CapacitorLifeUsedFraction: 0.7, HealthBand: health.BandWatch},
			{DriveID: failed[5].ID, Day: day(failed[5], 24*time.Hour), CapacitorLifeUsedFraction: 0.8, HealthBand: health.BandWatch},
			{DriveID: failed[5].ID, Day: day(failed[5], 72*time.Hour), CapacitorLifeUsedFraction: 0.6, HealthBand: health.BandWatch},
			{DriveID: failed[6].ID, Day: day(failed[6], 10*24*time.Hour), CapacitorLifeUsedFraction: 0.9, HealthBand: health.BandWatch},
		}
		lr.must(lr.st.DB(lr.ctx).Create(&rows).Error)
		rel, err = ReliabilityFor(lr.ctx, lr.st, Config{})
		lr.must(err)
		bt = rel.Backtest
		// Covered: 0.5, 0.7 and the later of 0.8/0.6; the 0.9 is ten days
		// old, beyond the 7-day tolerance. Median 0.7: the model runs late.
		if bt.Covered != 3 || bt.Uncovered != 9 || bt.MedianLifeUsed == nil || !near(*bt.MedianLifeUsed, 0.7, 1e-12) ||
			!strings.Contains(bt.Reading, "runs late") {
			t.Errorf("backtest %+v (median %v)", bt, bt.MedianLifeUsed)
		}
		for _, f := range bt.Failures {
			if f.Serial == failed[5].Serial && (f.LifeUsedFraction == nil || *f.LifeUsedFraction != 0.8) {
				t.Errorf("drive %s: %+v, want the latest day's 0.8", f.Serial, f)
			}
			if f.Serial == failed[6].Serial && (f.Covered || !strings.Contains(f.Note, "no daily assessment")) {
				t.Errorf("drive %s: %+v, want uncovered", f.Serial, f)
			}
		}
	})
}

func indexOf(ds []store.Drive, d store.Drive) int {
	for i, x := range ds {
		if x.ID == d.ID {
			return i
		}
	}
	return -1
}
