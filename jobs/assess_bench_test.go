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
// each got a day of new hourly readings after 30 days assessed: the fixed
// cost per drive with new readings (loading its context, the models,
// saving state, assessment and findings), which `kelvard bench assess`
// shows at fleet scale. On a machine shared with other work the time is
// noisy; allocations per run (-benchmem) are the steadier figure.
func BenchmarkIncrementalAssess(b *testing.B) {
	for _, d := range storetest.Dialects {
		b.Run(string(d), func(b *testing.B) {
			const drives, perRun = 100, 24
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
			ingest(30 * 24)
			if _, err := as.Assess(ctx, AssessOptions{Full: true}); err != nil {
				b.Fatal(err)
			}
			b.ReportAllocs()
			b.ResetTimer()
			for b.Loop() {
				b.StopTimer()
				ingest(perRun)
				b.StartTimer()
				sum, err := as.Assess(ctx, AssessOptions{})
				if err != nil {
					b.Fatal(err)
				}
				if sum.Drives != drives || sum.Readings != drives*perRun {
					b.Fatalf("run took %d drives and %d readings, want %d and %d", sum.Drives, sum.Readings, drives, drives*perRun)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*drives), "ns/drive")
		})
	}
}
