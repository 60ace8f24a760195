package plan

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// t0 is the start of every constructed series: the components of the rig's
// drives are fitted then.
var t0 = time.Date(2026, 1, 5, 0, 0, 0, 0, time.UTC)

func f64(v float64) *float64 { return &v }

func itoa64(v int64) string { return strconv.FormatInt(v, 10) }

// forEachStore runs f against PostgreSQL and SQLite, each on a fresh
// database, in parallel.
func forEachStore(t *testing.T, f func(t *testing.T, d store.Dialect)) {
	t.Helper()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			f(t, d)
		})
	}
}

// rig is a store with the storetest fixture fleet, a clock the test moves
// and an assessor on that clock.
type rig struct {
	t   *testing.T
	st  *store.Store
	f   storetest.Fixture
	now time.Time
	as  *jobs.Assessor
	ctx context.Context
}

func newRig(t *testing.T, d store.Dialect) *rig {
	t.Helper()
	r := &rig{t: t, now: t0, ctx: context.Background()}
	r.st = storetest.OpenWith(t, d, store.Options{Now: func() time.Time { return r.now }})
	r.f = storetest.Build(t, r.st, "a")
	r.as = jobs.NewAssessor(r.st, jobs.AssessConfig{Now: func() time.Time { return r.now }, ResolveAfter: time.Nanosecond})
	// Costs of the fixture model: a kit at 650 against a drive at 6400,
	// labour at 90 an hour.
	r.model(r.f.Model.ID, func(m *store.DriveModel) {
		m.LabourCostPerH, m.CapacitorLabourH, m.FanLabourH, m.DriveLabourH, m.LeadTimeDays = 90, 2.5, 0.75, 4, 42
	})
	r.refit(r.f.Drive.ID, t0)
	return r
}

func (r *rig) must(err error) {
	r.t.Helper()
	if err != nil {
		r.t.Fatal(err)
	}
}

// model changes a drive model.
func (r *rig) model(id int64, edit func(*store.DriveModel)) store.DriveModel {
	r.t.Helper()
	m, err := store.Update[store.DriveModel](r.ctx, r.st, id, func(m *store.DriveModel) error { edit(m); return nil })
	r.must(err)
	return m
}

// refit replaces both components of a drive at t, so life starts there.
func (r *rig) refit(driveID int64, t time.Time) {
	r.t.Helper()
	comps, err := store.List[store.Component](r.ctx, r.st, store.ListQuery{Filters: map[string]string{"drive_id": itoa64(driveID)}})
	r.must(err)
	for _, c := range comps.Items {
		if c.RemovedAt != nil {
			continue
		}
		_, err := store.Update[store.Component](r.ctx, r.st, c.ID, func(v *store.Component) error { v.RemovedAt = &t; return nil })
		r.must(err)
		_, err = store.Create[store.Component](r.ctx, r.st, func(v *store.Component) error {
			v.DriveID, v.Kind, v.InstalledAt = driveID, c.Kind, t
			return nil
		})
		r.must(err)
	}
}

// addDrive creates a drive of the model at a new position in the area,
// installed at installedAt, with its components fitted at t0.
func (r *rig) addDrive(serial string, modelID, areaID int64, installedAt time.Time) (store.Drive, store.Position) {
	r.t.Helper()
	p, err := store.Create[store.Position](r.ctx, r.st, func(v *store.Position) error {
		v.AreaID, v.Tag, v.SupplyVoltageV = areaID, "P-"+serial, 480
		return nil
	})
	r.must(err)
	var site int64
	a, err := store.Get[store.Area](r.ctx, r.st, areaID)
	r.must(err)
	site = a.SiteID
	d, err := store.Create[store.Drive](r.ctx, r.st, func(v *store.Drive) error {
		v.Serial, v.ModelID, v.SiteID, v.ManufacturedAt = serial, modelID, site, installedAt.AddDate(0, -1, 0)
		return nil
	})
	r.must(err)
	_, err = r.st.MoveDrive(r.ctx, d.ID, store.Move{PositionID: &p.ID, At: installedAt})
	r.must(err)
	d, err = store.Get[store.Drive](r.ctx, r.st, d.ID)
	r.must(err)
	return d, p
}

// ingest stores hourly readings at hours [from, to) after t0 at the
// position, with the air temperature of each hour and the current.
func (r *rig) ingest(positionID int64, from, to int, air func(h int) float64, current float64) {
	r.t.Helper()
	var rows []store.Reading
	for h := from; h < to; h++ {
		at := t0.Add(time.Duration(h) * time.Hour)
		rows = append(rows, store.Reading{PositionID: positionID, At: at, InternalAirC: f64(air(h)), AmbientC: f64(air(h) - 8),
			CurrentA: f64(current), FrequencyHz: f64(50), BusV: f64(1.35 * 480)})
	}
	if last := rows[len(rows)-1].At; r.now.Before(last) {
		r.now = last
	}
	_, err := r.st.Ingest(r.ctx, rows, store.IngestOptions{})
	r.must(err)
}

func (r *rig) assess() {
	r.t.Helper()
	_, err := r.as.Assess(r.ctx, jobs.AssessOptions{})
	r.must(err)
}

// twoMonths is the air of the forecast series: 85 °C in the first 30 days
// (intervals ending at hours 1..720), 95 °C after. At the fixture's rated
// current the ripple adds 5 °C to the capacitor core (DESIGN.md section 3).
func twoMonths(h int) float64 {
	if (h-1)/24 >= 30 {
		return 95
	}
	return 85
}

// capLifeH is the 10-degree rule, L = L0 · 2^((Tref − T)/10), for the
// fixture's 5000 h at 105 °C rated with ripple and 5 °C ripple rise, so
// Tref = 110 °C (capacitor makers' application notes; DESIGN.md section 3).
func capLifeH(coreC float64) float64 { return 5000 * math.Pow(2, (110-coreC)/10) }

// fanLifeH is the fan's L10 halving rule, 40 000 h at 60 °C halving every
// 10 °C (common practice; DESIGN.md section 3).
func fanLifeH(airC float64) float64 { return 40000 * math.Pow(2, (60-airC)/10) }

func relClose(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol*math.Abs(want) {
		t.Errorf("%s = %.12g, want %.12g (relative tolerance %g)", what, got, want, tol)
	}
}

func timeClose(t *testing.T, what string, got, want time.Time, tol time.Duration) {
	t.Helper()
	if d := got.Sub(want); d > tol || d < -tol {
		t.Errorf("%s = %s, want %s (±%s)", what, got.Format(time.RFC3339), want.Format(time.RFC3339), tol)
	}
}

// hoursAfter is t0 plus h hours, rounded to the second as the ledgers keep
// time.
func hoursAfter(base time.Time, h float64) time.Time {
	return base.Add(time.Duration(math.Round(h*3600)) * time.Second)
}

// failure records a failure event of a mode on a drive at t.
func (r *rig) failure(driveID int64, positionID *int64, at time.Time, mode health.FailureMode) {
	r.t.Helper()
	_, err := store.Create[store.Event](r.ctx, r.st, func(v *store.Event) error {
		v.DriveID, v.PositionID, v.At, v.Type, v.FailureMode = driveID, positionID, at, health.EventFailure, mode
		return nil
	})
	r.must(err)
}

func (r *rig) String() string { return fmt.Sprintf("rig at %s", r.now.Format(time.RFC3339)) }
