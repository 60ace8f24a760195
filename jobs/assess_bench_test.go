package jobs

import (
	"context"
	"fmt"
	"math"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

// BenchmarkIncrementalAssess times an incremental run over 100 drives that
// each got new hourly readings after 400 days assessed (the longest a
// life ledger keeps day by day): a day of them, or
// one hour as in service, where a run every quarter hour finds about one
// reading per drive. It measures the fixed cost per drive with new
// readings (loading its context, the models, saving state, assessment and
// findings), which `kelvard bench assess` shows at fleet scale. On a
// machine shared with other work the time is noisy; allocations per run
// (-benchmem) and, on PostgreSQL, the write-ahead log written per drive
// (WAL-B/drive) are the steadier figures.
func BenchmarkIncrementalAssess(b *testing.B) {
	for _, c := range []struct {
		d      store.Dialect
		perRun int
	}{{store.Postgres, 24}, {store.Postgres, 1}, {store.SQLite, 24}} {
		d, perRun := c.d, c.perRun
		b.Run(fmt.Sprintf("%s/%dh", d, perRun), func(b *testing.B) {
			const drives = 100
			now := t0
			st := storetest.OpenWith(b, d, store.Options{Now: func() time.Time { return now }})
			ctx := context.Background()
			positions := make([]int64, drives)
			for i := range positions {
				positions[i] = storetest.Build(b, st, fmt.Sprint("bench", i)).Position.ID
			}
			hour := 0
			ingest := func(hours int) {
				var rows []store.Reading
				for range hours {
					at := t0.Add(time.Duration(hour) * time.Hour)
					air := 38 + 6*math.Sin(float64(hour)/24*2*math.Pi)
					for _, p := range positions {
						rows = append(rows, store.Reading{PositionID: p, At: at, InternalAirC: f64(air), AmbientC: f64(air - 9),
							CurrentA: f64(52), FrequencyHz: f64(48), BusV: f64(650)})
					}
					hour++
				}
				now = t0.Add(time.Duration(hour) * time.Hour)
				if _, err := st.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
					b.Fatal(err)
				}
			}
			// The window checks run daily in service; here they stay out
			// of the runs timed, which take in new readings only.
			as := NewAssessor(st, AssessConfig{Now: func() time.Time { return now }, TrendEvery: 10 * 365 * 24 * time.Hour})
			ingest(400 * 24)
			if _, err := as.Assess(ctx, AssessOptions{Full: true}); err != nil {
				b.Fatal(err)
			}
			var wal float64
			lsn := func() string {
				var at string
				if err := st.SQL().QueryRowContext(ctx, "SELECT pg_current_wal_insert_lsn()::text").Scan(&at); err != nil {
					b.Fatal(err)
				}
				return at
			}
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				b.StopTimer()
				ingest(perRun)
				var before string
				if d == store.Postgres {
					before = lsn()
				}
				b.StartTimer()
				sum, err := as.Assess(ctx, AssessOptions{})
				if err != nil {
					b.Fatal(err)
				}
				if d == store.Postgres {
					b.StopTimer()
					var n float64
					if err := st.SQL().QueryRowContext(ctx, "SELECT pg_wal_lsn_diff($1::pg_lsn, $2::pg_lsn)", lsn(), before).Scan(&n); err != nil {
						b.Fatal(err)
					}
					wal += n
					b.StartTimer()
				}
				if sum.Drives != drives || sum.Readings != int64(drives*perRun) {
					b.Fatalf("run took %d drives and %d readings, want %d and %d", sum.Drives, sum.Readings, drives, drives*perRun)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*drives), "ns/drive")
			if d == store.Postgres {
				b.ReportMetric(wal/float64(b.N*drives), "WAL-B/drive")
			}
		})
	}
}
