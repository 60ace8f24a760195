package store_test

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// scanned is one reading as ScanReadings passes it on.
type scanned struct {
	drive, position int64
	at              time.Time
	airC            float64
}

func scanAll(t *testing.T, s *store.Store, from []store.ScanFrom) []scanned {
	t.Helper()
	var out []scanned
	err := s.ScanReadings(context.Background(), from, func(d, p int64, at time.Time, smp health.Sample) error {
		out = append(out, scanned{d, p, at, smp.InternalAirC})
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// TestScanReadingsWays holds every way the store reads spans (probes,
// whole histories and new readings since recent watermarks read in stored
// order, a group that outgrows its bound, a history larger than a group)
// to the same answer: each drive's readings within its own span, together
// and in time order, each once.
func TestScanReadingsWays(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		base := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
		var drives []storetest.Fixture
		for i := range 3 {
			drives = append(drives, storetest.Build(t, s, fmt.Sprint("scan", i)))
		}
		// Two rounds: the later hours first, then the earlier ones, so
		// the stored order is not time order.
		want := map[int64][]scanned{}
		for _, round := range [][2]int{{100, 200}, {0, 100}} {
			var rows []store.Reading
			for h := round[0]; h < round[1]; h++ {
				for i, f := range drives {
					air := 30 + float64(i) + float64(h)/1000
					rows = append(rows, store.Reading{PositionID: f.Position.ID, At: base.Add(time.Duration(h) * time.Hour),
						InternalAirC: &air})
				}
			}
			if _, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
				t.Fatal(err)
			}
		}
		// Drive 0 from its first reading on; drive 1 after hour 49 up to
		// hour 150; drive 2 nothing after the last reading.
		spans := []store.ScanFrom{
			{DriveID: drives[2].Drive.ID, After: base.Add(199 * time.Hour)},
			{DriveID: drives[0].Drive.ID, After: base.Add(-time.Microsecond)},
			{DriveID: drives[1].Drive.ID, After: base.Add(49 * time.Hour), Before: base.Add(150 * time.Hour)},
		}
		for i, f := range drives[:2] {
			lo, hi := 0, 200
			if i == 1 {
				lo, hi = 50, 150
			}
			for h := lo; h < hi; h++ {
				want[f.Drive.ID] = append(want[f.Drive.ID], scanned{f.Drive.ID, f.Position.ID,
					base.Add(time.Duration(h) * time.Hour), 30 + float64(i) + float64(h)/1000})
			}
		}
		check := func(name string, got []scanned) {
			t.Helper()
			byDrive := map[int64][]scanned{}
			var order []int64
			for _, r := range got {
				if n := len(order); n == 0 || order[n-1] != r.drive {
					if slices.Contains(order, r.drive) {
						t.Errorf("%s: drive %d's readings are not together", name, r.drive)
					}
					order = append(order, r.drive)
				}
				byDrive[r.drive] = append(byDrive[r.drive], r)
			}
			for id, w := range want {
				g := byDrive[id]
				if len(g) != len(w) {
					t.Errorf("%s: drive %d: %d readings, want %d", name, id, len(g), len(w))
					continue
				}
				for k := range w {
					if !g[k].at.Equal(w[k].at) || g[k].position != w[k].position || math.Abs(g[k].airC-w[k].airC) > 1e-12 {
						t.Errorf("%s: drive %d reading %d: %+v, want %+v", name, id, k, g[k], w[k])
						break
					}
				}
			}
			if n := len(byDrive[drives[2].Drive.ID]); n != 0 {
				t.Errorf("%s: drive 2 got %d readings after its last", name, n)
			}
		}
		// Drive 0's watermark lies more than a week before drive 2's: it
		// is probed, the others are read in stored order.
		check("new readings", scanAll(t, s, spans))
		whole := func(expect int64) []store.ScanFrom {
			out := slices.Clone(spans)
			for i := range out {
				out[i].Whole, out[i].Expect = true, expect
			}
			return out
		}
		check("whole, size unknown", scanAll(t, s, whole(0)))
		check("whole, size known", scanAll(t, s, whole(200)))
		store.SetScanGroupRows(s, 150)
		check("whole, larger than a group", scanAll(t, s, whole(1000)))
		check("whole, group outgrows its bound", scanAll(t, s, whole(10)))
		mixed := whole(10)
		mixed[1].Whole = false // drive 0 probed, the others outgrow their group
		check("probed and outgrown together", scanAll(t, s, mixed))
	})
}

// TestScanNarrowsBefore: with NarrowBefore set, readings before it carry at
// least the fields health.LedgerSample keeps, readings from it on every
// field; on PostgreSQL a whole-history read does drop the others.
func TestScanNarrowsBefore(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "narrow")
		base := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
		var rows []store.Reading
		want := map[int64]health.Sample{}
		for h := 1; h <= 48; h++ {
			v := func(k float64) *float64 { x := k + float64(h)/8; return &x }
			r := store.Reading{PositionID: f.Position.ID, At: base.Add(time.Duration(h) * time.Hour),
				InternalAirC: v(30), AmbientC: v(20), HeatsinkC: v(50), CurrentA: v(10), PeakCurrentA: v(14),
				FrequencyHz: v(45), BusV: v(560), BusRippleV: v(8), CapacitanceUF: v(4700), ESRMilliohm: v(20)}
			rows = append(rows, r)
			want[r.At.Unix()] = health.Sample{At: r.At.Unix(), InternalAirC: *r.InternalAirC, AmbientC: *r.AmbientC,
				HeatsinkC: *r.HeatsinkC, CurrentA: *r.CurrentA, PeakCurrentA: *r.PeakCurrentA, FrequencyHz: *r.FrequencyHz,
				BusV: *r.BusV, BusRippleV: *r.BusRippleV, CapacitanceUF: *r.CapacitanceUF, ESRMilliohm: *r.ESRMilliohm}
		}
		if _, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
			t.Fatal(err)
		}
		narrowBefore := base.Add(24*time.Hour + 30*time.Minute)
		for _, whole := range []bool{false, true} {
			var got []health.Sample
			err := s.ScanReadings(ctx, []store.ScanFrom{{DriveID: f.Drive.ID, After: base, Whole: whole, Expect: 48,
				NarrowBefore: narrowBefore}}, func(_, _ int64, _ time.Time, smp health.Sample) error {
				got = append(got, smp)
				return nil
			})
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != 48 {
				t.Fatalf("whole %v: %d readings, want 48", whole, len(got))
			}
			// Printed, NaN equals NaN; %v prints floats exactly.
			eq := func(a, b health.Sample) bool { return fmt.Sprint(a) == fmt.Sprint(b) }
			narrowed := 0
			for _, g := range got {
				w := want[g.At]
				same := eq(g, w)
				if g.At < narrowBefore.Unix() && !same {
					if !eq(g, health.LedgerSample(w)) {
						t.Errorf("whole %v, reading at %d: %+v, want %+v or its ledger fields", whole, g.At, g, w)
					}
					narrowed++
					continue
				}
				if !same {
					t.Errorf("whole %v, reading at %d: %+v, want %+v", whole, g.At, g, w)
				}
			}
			if whole && s.Dialect() == store.Postgres && narrowed != 24 {
				t.Errorf("whole-history read on PostgreSQL narrowed %d readings, want 24", narrowed)
			}
		}
	})
}

// TestFreshScanKeepsToTheIndex: the read of new readings in stored order
// takes the primary key to them (a bitmap scan) even where PostgreSQL's
// statistics call the partition empty, as they do for a month's partition
// analysed before its readings came, and even in the generic plan a
// cached statement settles on. The read of whole histories, planned from
// the same statistics, scans that partition whole: the trap the new
// readings' read is kept out of.
func TestFreshScanKeepsToTheIndex(t *testing.T) {
	t.Parallel()
	s := storetest.Open(t, store.Postgres)
	ctx := context.Background()
	month := time.Date(2026, 3, 1, 0, 0, 0, 0, time.UTC)
	if err := s.EnsureReadingPartitions(ctx, month, month); err != nil {
		t.Fatal(err)
	}
	if err := s.DB(ctx).Exec("ANALYZE readings").Error; err != nil {
		t.Fatal(err)
	}
	var ids []int64
	var rows []store.Reading
	for i := range 3 {
		f := storetest.Build(t, s, fmt.Sprint("fresh", i))
		ids = append(ids, f.Drive.ID)
		for h := range 300 {
			air := 35.0
			rows = append(rows, store.Reading{PositionID: f.Position.ID, At: month.Add(time.Duration(h) * time.Hour), InternalAirC: &air})
		}
	}
	if _, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
		t.Fatal(err)
	}
	const partition = "readings_p202603"
	after := month.Add(290 * time.Hour)
	plan, err := store.ExplainPhysicalScan(ctx, s, true, ids, after)
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(plan, "Seq Scan on "+partition) || !strings.Contains(plan, "Bitmap Heap Scan on "+partition) {
		t.Errorf("new readings' read, generic plan:\n%s\nwant a bitmap scan of %s", plan, partition)
	}
	whole, err := store.ExplainPhysicalScan(ctx, s, false, ids, after)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(whole, "Seq Scan on "+partition) {
		t.Errorf("whole histories' read, generic plan:\n%s\nwant the sequential scan of %s that statistics of an empty partition lead to", whole, partition)
	}
	// And the scan itself passes on the new readings.
	got := scanAll(t, s, []store.ScanFrom{{DriveID: ids[1], After: after}})
	if len(got) != 9 {
		t.Errorf("%d new readings scanned, want 9", len(got))
	}
}
