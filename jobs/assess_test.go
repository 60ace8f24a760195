package jobs

import (
	"context"
	"encoding/json"
	"math"
	"slices"
	"strconv"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// The closed-form checks below use the 10-degree rule of capacitor makers'
// application notes, L = L0 × 2^((Tref − T)/10), with Palmgren–Miner
// accumulation D = Σ dt/L(T) (DESIGN.md section 3): 5000 h rated at 105 °C
// with rated ripple and 5 °C ripple self-heating gives Tref = 110 °C.

// t0 is the start of every constructed series.
var t0 = time.Date(2026, 1, 5, 0, 0, 0, 0, time.UTC)

func f64(v float64) *float64 { return &v }

// rig is a store with one fixture fleet and a clock the test moves.
type rig struct {
	t   *testing.T
	st  *store.Store
	f   storetest.Fixture
	now time.Time
	as  *Assessor
}

func newRig(t *testing.T, d store.Dialect) *rig {
	t.Helper()
	r := &rig{t: t, now: t0}
	r.st = storetest.OpenWith(t, d, store.Options{Now: func() time.Time { return r.now }})
	r.f = storetest.Build(t, r.st, "a")
	r.as = NewAssessor(r.st, AssessConfig{Now: func() time.Time { return r.now }, ResolveAfter: time.Nanosecond})
	// Fit a fresh capacitor bank and fan at t0 so life starts there.
	r.refit(t0)
	return r
}

// refit replaces both components of the fixture drive at t.
func (r *rig) refit(t time.Time) {
	r.t.Helper()
	ctx := context.Background()
	comps, err := store.List[store.Component](ctx, r.st, store.ListQuery{Filters: map[string]string{"drive_id": itoa(r.f.Drive.ID)}})
	if err != nil {
		r.t.Fatal(err)
	}
	for _, c := range comps.Items {
		if c.RemovedAt != nil {
			continue
		}
		if _, err := store.Update[store.Component](ctx, r.st, c.ID, func(v *store.Component) error { v.RemovedAt = &t; return nil }); err != nil {
			r.t.Fatal(err)
		}
		if _, err := store.Create[store.Component](ctx, r.st, func(v *store.Component) error {
			v.DriveID, v.Kind, v.InstalledAt = r.f.Drive.ID, c.Kind, t
			return nil
		}); err != nil {
			r.t.Fatal(err)
		}
	}
}

// ingest stores hourly readings at hours [from, to) after t0 with the given
// air temperature and current. The components are fitted at t0, so a
// series starting at hour 0 leaves no unobserved service.
func (r *rig) ingest(from, to int, air func(h int) float64, current float64) {
	r.t.Helper()
	var rows []store.Reading
	for h := from; h < to; h++ {
		at := t0.Add(time.Duration(h) * time.Hour)
		rows = append(rows, store.Reading{PositionID: r.f.Position.ID, At: at, InternalAirC: f64(air(h)), AmbientC: f64(air(h) - 8),
			CurrentA: f64(current), FrequencyHz: f64(math.Min(current, 50)), BusV: f64(1.35 * 480)})
	}
	if r.now.Before(rows[len(rows)-1].At) {
		r.now = rows[len(rows)-1].At
	}
	if _, err := r.st.Ingest(context.Background(), rows, store.IngestOptions{}); err != nil {
		r.t.Fatal(err)
	}
}

func (r *rig) assess(full bool) store.Assessment {
	r.t.Helper()
	if _, err := r.as.Assess(context.Background(), AssessOptions{Full: full}); err != nil {
		r.t.Fatal(err)
	}
	a, err := r.st.LatestAssessment(context.Background(), r.f.Drive.ID)
	if err != nil {
		r.t.Fatal(err)
	}
	return a
}

func report(t *testing.T, a store.Assessment) health.DriveAssessment {
	t.Helper()
	var rep health.DriveAssessment
	if err := json.Unmarshal(a.Report, &rep); err != nil {
		t.Fatal(err)
	}
	return rep
}

func relClose(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol*math.Abs(want) {
		t.Errorf("%s = %.12g, want %.12g (relative tolerance %g)", what, got, want, tol)
	}
}

func itoa(v int64) string { return strconv.FormatInt(v, 10) }

func forEachStore(t *testing.T, f func(t *testing.T, d store.Dialect)) {
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			f(t, d)
		})
	}
}

func TestConstantTemperature(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		// 55 °C air and rated current: core 60 °C, L = 5000 × 2^5 = 160 000 h.
		r.ingest(0, 2001, func(int) float64 { return 55 }, 77)
		a := r.assess(false)
		rep := report(t, a)
		relClose(t, "capacitor life used", rep.Capacitor.LifeUsedFraction, 2000.0/160000, 1e-9)
		relClose(t, "remaining hours", rep.Capacitor.RemainingH, (1-2000.0/160000)*160000, 1e-6)
		if a.HealthBand == "" || a.CapacitorEndOfLife == nil {
			t.Errorf("assessment row %+v", a)
		}
	})
}

func TestTwoTemperatureLevels(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		// A part rated without ripple and no current: core = air. Half the
		// time at 45 °C, half at 65 °C: Miner life 128 000 h (DESIGN.md
		// section 3 check value).
		if _, err := store.Update[store.DriveModel](context.Background(), r.st, r.f.Model.ID, func(m *store.DriveModel) error {
			m.Capacitor.RatingIncludesRipple = false
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		r.ingest(0, 1001, func(h int) float64 {
			if h%2 == 0 {
				return 45
			}
			return 65
		}, 0)
		rep := report(t, r.assess(false))
		relClose(t, "capacitor life used", rep.Capacitor.LifeUsedFraction, 1000.0/128000, 1e-9)
	})
}

func TestGapFilledConservatively(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		air := func(int) float64 { return 55 }
		r.ingest(0, 101, air, 77)
		r.ingest(111, 201, air, 77) // hours 101..110 missing
		rep := report(t, r.assess(false))
		// 100 + 89 logged hourly intervals at 160 000 h; the 11 h interval
		// from hour 100 to 111 is a gap filled at the area's design maximum,
		// 35 °C, with full rated ripple: core 40 °C, L = 5000 × 2^7 =
		// 640 000 h.
		want := 189.0/160000 + 11.0/640000
		relClose(t, "capacitor life used", rep.Capacitor.LifeUsedFraction, want, 1e-9)
	})
}

func TestStoredDriveAgesOnTheShelf(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		ctx := context.Background()
		stores, err := store.Create[store.Area](ctx, r.st, func(a *store.Area) error {
			a.SiteID, a.Name = r.f.Site.ID, "Stores"
			a.Environment.AmbientMinC, a.Environment.AmbientMaxC = 15, 30
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		spare, err := store.Create[store.Drive](ctx, r.st, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID, v.StoresAreaID, v.ManufacturedAt = "SPARE", r.f.Model.ID, r.f.Site.ID, &stores.ID, t0
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		r.now = t0.Add(8760 * time.Hour)
		if _, err := r.as.Assess(ctx, AssessOptions{}); err != nil {
			t.Fatal(err)
		}
		a, err := r.st.LatestAssessment(ctx, spare.ID)
		if err != nil {
			t.Fatal(err)
		}
		rep := report(t, a)
		// Storage at the stores' design maximum, 30 °C, no ripple:
		// L = 5000 × 2^((110 − 30)/10) = 1 280 000 h.
		relClose(t, "shelf life used", rep.Capacitor.LifeUsedFraction, 8760.0/1280000, 1e-9)
		if !slices.ContainsFunc(rep.Findings, func(f health.Finding) bool { return f.Rule == "storage.energise_due" }) {
			t.Errorf("a year on the shelf without power: findings %v", rep.Findings)
		}
		// A further run advances the shelf time incrementally and agrees
		// with a full recompute.
		r.now = r.now.Add(30 * 24 * time.Hour)
		if _, err := r.as.Assess(ctx, AssessOptions{DriveIDs: []int64{spare.ID}}); err != nil {
			t.Fatal(err)
		}
		inc, _ := r.st.LatestAssessment(ctx, spare.ID)
		if _, err := r.as.Assess(ctx, AssessOptions{DriveIDs: []int64{spare.ID}, Full: true}); err != nil {
			t.Fatal(err)
		}
		full, _ := r.st.LatestAssessment(ctx, spare.ID)
		relClose(t, "incremental vs full shelf life", inc.CapacitorLifeUsedFraction, full.CapacitorLifeUsedFraction, 1e-9)
		relClose(t, "shelf life after 395 days", full.CapacitorLifeUsedFraction, (8760.0+720)/1280000, 1e-9)
	})
}

func TestIncrementalEqualsFullEqualsBackfill(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		air := func(h int) float64 { return 40 + 15*math.Sin(2*math.Pi*float64(h)/24) }
		// Incremental: three chunks, a run after each.
		r.ingest(1, 300, air, 60)
		r.assess(false)
		r.ingest(300, 700, air, 60)
		r.assess(false)
		r.ingest(700, 1000, air, 60)
		inc := r.assess(false)
		full := r.assess(true)
		relClose(t, "incremental vs full", inc.CapacitorLifeUsedFraction, full.CapacitorLifeUsedFraction, 1e-9)
		relClose(t, "incremental vs full fan", inc.FanLifeUsedFraction, full.FanLifeUsedFraction, 1e-9)

		// Backfill: a second drive gets the middle of its series late.
		r2 := newRig(t, d)
		r2.ingest(1, 300, air, 60)
		r2.ingest(700, 1000, air, 60)
		r2.assess(false)
		r2.ingest(300, 700, air, 60) // late: marks the drive for recompute
		back := r2.assess(false)
		relClose(t, "after backfill vs full", back.CapacitorLifeUsedFraction, full.CapacitorLifeUsedFraction, 1e-9)
	})
}

func TestSwapMidSeries(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		ctx := context.Background()
		air := func(int) float64 { return 55 }
		r.ingest(0, 501, air, 77)
		spare, err := store.Create[store.Drive](ctx, r.st, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID, v.ManufacturedAt = "NEW", r.f.Model.ID, r.f.Site.ID, t0
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		swap := t0.Add(500 * time.Hour)
		if _, err := r.st.MoveDrive(ctx, spare.ID, store.Move{PositionID: &r.f.Position.ID, At: swap}); err != nil {
			t.Fatal(err)
		}
		r.ingest(501, 1001, air, 77) // these belong to the new drive
		r.assess(false)
		old, err := r.st.LatestAssessment(ctx, r.f.Drive.ID)
		if err != nil {
			t.Fatal(err)
		}
		// The old drive: 500 h at 160 000 h, then stores at the site's design
		// maximum, 38 °C, no ripple: L = 5000 × 2^7.2.
		shelf := 5000 * math.Pow(2, (110-38)/10.0)
		relClose(t, "old drive", report(t, old).Capacitor.LifeUsedFraction, 500.0/160000+500.0/shelf, 1e-9)
		if old.PositionID != nil {
			t.Errorf("old drive still at position %d", *old.PositionID)
		}
	})
}

func TestFindingsLifecycle(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		ctx := context.Background()
		r.ingest(1, 200, func(int) float64 { return 35 }, 40)
		// A hose-down hall for a Type 1 / IP21 drive: enclosure.water.
		if _, err := store.Update[store.Area](ctx, r.st, r.f.Area.ID, func(a *store.Area) error {
			a.Environment.Water = health.WaterHoseDown
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		r.assess(false)
		water := findOne(t, r, "enclosure.water")
		if water.Status != store.FindingOpen || water.Severity != health.SeverityCritical || water.Caution == "" {
			t.Fatalf("water finding %+v", water)
		}
		// Suppressed: no longer counted, still listed.
		until := r.now.Add(48 * time.Hour)
		if _, err := r.st.SuppressFinding(ctx, water.ID, store.FindingAction{Reason: "hall out of use", Until: &until}); err != nil {
			t.Fatal(err)
		}
		r.now = r.now.Add(2 * time.Hour)
		a := r.assess(false)
		if a.HealthBand == health.BandUrgent {
			t.Errorf("a suppressed critical finding still drives the band: %s", a.HealthBand)
		}
		if got := findOne(t, r, "enclosure.water"); got.Status != store.FindingSuppressed {
			t.Errorf("status %s after suppression", got.Status)
		}
		// The suppression expires: the finding reopens.
		r.now = until.Add(time.Hour)
		r.assess(false)
		if got := findOne(t, r, "enclosure.water"); got.Status != store.FindingOpen {
			t.Errorf("status %s after the suppression expired", got.Status)
		}
		// The hall is dried out: the finding clears and resolves.
		if _, err := store.Update[store.Area](ctx, r.st, r.f.Area.ID, func(a *store.Area) error {
			a.Environment.Water = health.WaterNone
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		r.now = r.now.Add(time.Hour)
		r.assess(false)
		if got := findOne(t, r, "enclosure.water"); got.ClearedAt == nil {
			t.Errorf("the condition cleared but the finding has no cleared time: %+v", got)
		}
		// Cleared for longer than ResolveAfter: resolved on the next run.
		r.now = r.now.Add(2 * time.Hour)
		r.assess(false)
		page, err := r.st.ListFindings(ctx, store.ListQuery{Filters: map[string]string{"rule": "enclosure.water", "status": "resolved"}})
		if err != nil || len(page.Items) != 1 || page.Items[0].ResolvedAt == nil {
			t.Errorf("resolved findings %+v, %v", page.Items, err)
		}
	})
}

func findOne(t *testing.T, r *rig, rule string) store.Finding {
	t.Helper()
	page, err := r.st.ListFindings(context.Background(), store.ListQuery{Filters: map[string]string{"rule": rule, "drive_id": itoa(r.f.Drive.ID)}})
	if err != nil {
		t.Fatal(err)
	}
	if len(page.Items) != 1 {
		t.Fatalf("%d unresolved %s findings", len(page.Items), rule)
	}
	return page.Items[0]
}
