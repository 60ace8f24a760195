package jobs

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestRetentionRollUp holds the roll-up to its promises: nothing is rolled
// up before it is assessed; rolled-up months lose their raw rows (the whole
// partition on PostgreSQL); and a full recompute over the roll-ups agrees
// with the raw result within 0.1 % (the accuracy health.BuildHourAggregates
// documents for 1 °C time-at-temperature bins). A drive retired before it
// was ever assessed is never assessed again, so its readings must not hold
// its months back.
func TestRetentionRollUp(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		ctx := context.Background()
		rng := rand.New(rand.NewPCG(7, 11))
		// Ten-minute readings over 75 days: a daily air cycle with noise
		// and a current that wanders, so hours hold spread that the bins
		// and current moments must carry.
		var rows []store.Reading
		for k := 1; k <= 75*144; k++ {
			at := t0.Add(time.Duration(k) * 10 * time.Minute)
			hour := float64(k) / 6
			air := 42 + 9*math.Sin(2*math.Pi*hour/24) + rng.NormFloat64()
			cur := 55 + 15*math.Sin(2*math.Pi*hour/7) + 3*rng.NormFloat64()
			rows = append(rows, store.Reading{PositionID: r.f.Position.ID, At: at, InternalAirC: f64(air), AmbientC: f64(air - 9),
				CurrentA: f64(math.Max(cur, 0)), FrequencyHz: f64(45), BusV: f64(650), HeatsinkC: f64(air + 12)})
		}
		r.now = rows[len(rows)-1].At
		for i := 0; i < len(rows); i += 5000 {
			if _, err := r.st.Ingest(ctx, rows[i:min(i+5000, len(rows))], store.IngestOptions{}); err != nil {
				t.Fatal(err)
			}
		}
		// A second drive logs for three weeks of January and is then
		// retired before any assessment.
		gone := storetest.Build(t, r.st, "retired")
		var goneRows []store.Reading
		for k := 1; k <= 21*24; k++ {
			goneRows = append(goneRows, store.Reading{PositionID: gone.Position.ID, At: t0.Add(time.Duration(k) * time.Hour),
				InternalAirC: f64(38), CurrentA: f64(20)})
		}
		if _, err := r.st.Ingest(ctx, goneRows, store.IngestOptions{}); err != nil {
			t.Fatal(err)
		}
		if _, err := r.st.MoveDrive(ctx, gone.Drive.ID, store.Move{At: t0.Add(22 * 24 * time.Hour), Status: health.StatusRetired}); err != nil {
			t.Fatal(err)
		}
		job := NewRetentionJob(r.st, RetentionConfig{RawRetention: 30 * 24 * time.Hour, Now: func() time.Time { return r.now }})

		// Not assessed yet: nothing may be rolled up.
		if _, err := job.Run(ctx, r.now, nil); err != nil {
			t.Fatal(err)
		}
		if n := countRows(t, r.st, "readings_hourly"); n != 0 {
			t.Fatalf("%d hours rolled up before any assessment", n)
		}

		raw := r.assess(true)
		st, err := job.Run(ctx, r.now, nil)
		if err != nil {
			t.Fatal(err)
		}
		if st.Readings == 0 || countRows(t, r.st, "readings_hourly") == 0 {
			t.Fatalf("retention rolled nothing up: %+v", st)
		}
		jan := store.RollupMonth{Start: time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC), End: time.Date(2026, 2, 1, 0, 0, 0, 0, time.UTC)}
		months, err := r.st.RawMonths(ctx, jan.End)
		if err != nil {
			t.Fatal(err)
		}
		if len(months) != 0 {
			t.Errorf("raw readings of January remain after the roll-up: %v", months)
		}
		if d == store.Postgres {
			var n int64
			r.st.DB(ctx).Raw("SELECT count(*) FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace WHERE c.relname = 'readings_p202601' AND n.nspname = current_schema()").Scan(&n)
			if n != 0 {
				t.Error("January's partition was not dropped")
			}
		}
		// A late reading for an hour now kept only as an aggregate is
		// refused, not acknowledged and lost at the next roll-up; one for
		// a drive with no roll-up in that hour is taken.
		lateAt := t0.Add(10*24*time.Hour + 5*time.Minute)
		air := 40.0
		_, err = r.st.Ingest(ctx, []store.Reading{{PositionID: r.f.Position.ID, At: lateAt, InternalAirC: &air}}, store.IngestOptions{})
		var ve *store.ValidationError
		if !errors.As(err, &ve) || len(ve.Fields) != 1 || ve.Fields[0].Field != "at" || !strings.Contains(ve.Fields[0].Reason, "hourly aggregate") {
			t.Errorf("a late reading in a rolled-up hour: %v", err)
		}
		part, err := r.st.Ingest(ctx, []store.Reading{{PositionID: r.f.Position.ID, At: lateAt, InternalAirC: &air}}, store.IngestOptions{Partial: true})
		if err != nil || part.Inserted != 0 || len(part.Rejected) != 1 {
			t.Errorf("the same reading with partial: %+v %v", part, err)
		}
		other := storetest.Build(t, r.st, "late")
		if res, err := r.st.Ingest(ctx, []store.Reading{{PositionID: other.Position.ID, At: lateAt, InternalAirC: &air}}, store.IngestOptions{}); err != nil || res.Inserted != 1 {
			t.Errorf("a late reading of a drive with no roll-up in that hour: %+v %v", res, err)
		}
		rolled := r.assess(true)
		rel := math.Abs(rolled.CapacitorLifeUsedFraction-raw.CapacitorLifeUsedFraction) / raw.CapacitorLifeUsedFraction
		if rel > 0.001 {
			t.Errorf("capacitor life from roll-ups %.9g, from raw readings %.9g: %.4f %% apart, want at most 0.1 %%",
				rolled.CapacitorLifeUsedFraction, raw.CapacitorLifeUsedFraction, 100*rel)
		}
		frel := math.Abs(rolled.FanLifeUsedFraction-raw.FanLifeUsedFraction) / raw.FanLifeUsedFraction
		if frel > 0.001 {
			t.Errorf("fan life from roll-ups %.9g, from raw %.9g: %.4f %% apart", rolled.FanLifeUsedFraction, raw.FanLifeUsedFraction, 100*frel)
		}
		t.Logf("%s: capacitor %.4f %% apart, fan %.4f %% apart after rolling up %d readings", d, 100*rel, 100*frel, st.Readings)
	})
}

func countRows(t *testing.T, st *store.Store, table string) int64 {
	t.Helper()
	var n int64
	if err := st.DB(context.Background()).Table(table).Count(&n).Error; err != nil {
		t.Fatal(err)
	}
	return n
}
