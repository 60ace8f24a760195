package store_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// day0 is when the fixture's readings start; the fixture drive stands at
// its position from 2020-06-01.
var day0 = time.Date(2024, 3, 1, 0, 0, 0, 0, time.UTC)

func f(v float64) *float64 { return &v }

// hourly makes n hourly readings at the fixture position from start.
func hourly(tag string, start time.Time, n int) []store.Reading {
	out := make([]store.Reading, n)
	for i := range out {
		at := start.Add(time.Duration(i) * time.Hour)
		out[i] = store.Reading{Position: tag, At: at,
			AmbientC: f(20 + float64(at.Hour()%10)), InternalAirC: f(31.5), CurrentA: f(40), PeakCurrentA: f(44), BusV: f(678)}
	}
	return out
}

// fieldsOf lists "row:field" for each field error, to compare in tests.
func fieldsOf(fe []store.FieldError) []string {
	out := make([]string, len(fe))
	for i, e := range fe {
		out[i] = fmt.Sprintf("%d:%s", e.Row, e.Field)
	}
	return out
}

func countReadings(t *testing.T, s *store.Store, driveID int64) int {
	t.Helper()
	n := 0
	err := s.ScanSamples(context.Background(), driveID, time.Time{}, time.Time{}, func(int64, health.Sample) error { n++; return nil })
	if err != nil {
		t.Fatal(err)
	}
	return n
}

func TestIngestReplayStoresNothingTwice(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		rows := hourly(fx.Position.Tag, day0, 48)
		res, err := s.Ingest(ctx, rows, store.IngestOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if res.Inserted != 48 || res.AlreadyPresent != 0 || len(res.Conflicts) != 0 || len(res.Rejected) != 0 {
			t.Fatalf("first post: %+v", res)
		}
		res, err = s.Ingest(ctx, rows, store.IngestOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if res.Inserted != 0 || res.AlreadyPresent != 48 || len(res.Conflicts) != 0 {
			t.Fatalf("replay: %+v", res)
		}
		// A batch that overlaps: half old, half new.
		res, err = s.Ingest(ctx, hourly(fx.Position.Tag, day0.Add(24*time.Hour), 48), store.IngestOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if res.Inserted != 24 || res.AlreadyPresent != 24 {
			t.Fatalf("overlapping batch: %+v", res)
		}
		if n := countReadings(t, s, fx.Drive.ID); n != 72 {
			t.Errorf("%d readings stored, want 72", n)
		}
	})
}

func TestIngestConflictKeepsTheStoredRow(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		rows := hourly(fx.Position.Tag, day0, 3)
		if _, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
			t.Fatal(err)
		}
		changed := hourly(fx.Position.Tag, day0, 3)
		changed[1].AmbientC = f(99)
		changed[1].BusV = nil
		changed[1].HeatsinkC = f(50)
		changed[2].Line = 7
		changed[2].CurrentA = f(41)
		res, err := s.Ingest(ctx, changed, store.IngestOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if res.Inserted != 0 || res.AlreadyPresent != 1 || len(res.Conflicts) != 2 {
			t.Fatalf("conflicting batch: %+v", res)
		}
		c := res.Conflicts[0]
		if c.Row != 2 || c.DriveID != fx.Drive.ID || !c.At.Equal(day0.Add(time.Hour)) ||
			!slices.Equal(c.Fields, []string{"ambient_c", "heatsink_c", "bus_v"}) {
			t.Errorf("first conflict %+v", c)
		}
		if c := res.Conflicts[1]; c.Row != 3 || c.Line != 7 || !slices.Equal(c.Fields, []string{"current_a"}) {
			t.Errorf("second conflict %+v", c)
		}
		page, err := s.Readings(ctx, fx.Drive.ID, time.Time{}, time.Time{}, 0, "")
		if err != nil {
			t.Fatal(err)
		}
		if len(page.Items) != 3 || *page.Items[1].AmbientC != 21 || page.Items[1].HeatsinkC != nil || *page.Items[1].BusV != 678 {
			t.Errorf("stored row was changed: %+v", page.Items[1])
		}
	})
}

func TestIngestAtomicAndPartial(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		rows := hourly(fx.Position.Tag, day0, 5)
		rows[1].AmbientC = f(-80)
		rows[3].Position = "NO-SUCH-TAG"
		rows[3].Line = 5
		refused := []store.FieldError{{Field: "bus_v", Row: 6, Line: 7, Reason: "must be a decimal number"}}
		_, err := s.Ingest(ctx, rows, store.IngestOptions{Refused: refused})
		var ve *store.ValidationError
		if !errors.As(err, &ve) {
			t.Fatalf("atomic batch with bad rows: %v, want a validation error", err)
		}
		if got := fieldsOf(ve.Fields); !slices.Equal(got, []string{"2:ambient_c", "4:position", "6:bus_v"}) {
			t.Errorf("atomic errors %v", got)
		}
		if ve.Fields[1].Line != 5 || !strings.Contains(ve.Fields[1].Reason, "NO-SUCH-TAG") {
			t.Errorf("unknown position error %+v does not name the tag or the line", ve.Fields[1])
		}
		if n := countReadings(t, s, fx.Drive.ID); n != 0 {
			t.Fatalf("%d readings written by a refused batch", n)
		}
		res, err := s.Ingest(ctx, rows, store.IngestOptions{Partial: true, Refused: refused})
		if err != nil {
			t.Fatal(err)
		}
		if got := fieldsOf(res.Rejected); res.Inserted != 3 || !slices.Equal(got, []string{"2:ambient_c", "4:position", "6:bus_v"}) {
			t.Errorf("partial batch %+v", res)
		}
		if n := countReadings(t, s, fx.Drive.ID); n != 3 {
			t.Errorf("%d readings after a partial batch, want 3", n)
		}
	})
}

func TestIngestValidationNamesEveryFailure(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		other := storetest.Build(t, s, "b")
		// The same tag at a second site, with no drive installed there.
		twin, err := store.Create(ctx, s, func(v *store.Position) error {
			v.AreaID, v.Tag, v.SupplyVoltageV = other.Area.ID, fx.Position.Tag, 480
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		tag := fx.Position.Tag
		good := func() store.Reading { return hourly(tag, day0, 1)[0] }
		future := s.Now().Add(6 * time.Minute)
		cases := []struct {
			name   string
			edit   func(r *store.Reading)
			ctx    context.Context
			field  string
			reason string
		}{
			{"internal air too hot", func(r *store.Reading) { r.InternalAirC = f(151) }, nil, "internal_air_c", "between -50 and 150"},
			{"heatsink too cold", func(r *store.Reading) { r.HeatsinkC = f(-51) }, nil, "heatsink_c", "between -50 and 150"},
			{"ambient NaN", func(r *store.Reading) { r.AmbientC = f(math.NaN()) }, nil, "ambient_c", "finite"},
			{"negative current", func(r *store.Reading) { r.CurrentA = f(-1) }, nil, "current_a", "negative"},
			{"current over ten times the rating", func(r *store.Reading) { r.CurrentA = f(771) }, nil, "current_a", "770 A"},
			{"peak current over ten times the rating", func(r *store.Reading) { r.PeakCurrentA = f(800) }, nil, "peak_current_a", "770 A"},
			{"negative bus voltage", func(r *store.Reading) { r.BusV = f(-5) }, nil, "bus_v", "negative"},
			{"negative ripple", func(r *store.Reading) { r.BusRippleV = f(-0.5) }, nil, "bus_ripple_v", "negative"},
			{"negative frequency", func(r *store.Reading) { r.FrequencyHz = f(-50) }, nil, "frequency_hz", "negative"},
			{"negative run hours", func(r *store.Reading) { r.RunHoursH = f(-1) }, nil, "run_hours_h", "negative"},
			{"negative capacitor fraction", func(r *store.Reading) { r.DriveCapacitorLifeUsedFraction = f(-0.1) }, nil, "drive_capacitor_life_used_fraction", "negative"},
			{"negative fan fraction", func(r *store.Reading) { r.DriveFanLifeUsedFraction = f(-0.1) }, nil, "drive_fan_life_used_fraction", "negative"},
			{"infinite capacitance", func(r *store.Reading) { r.CapacitanceUF = f(math.Inf(1)) }, nil, "capacitance_uf", "finite"},
			{"NaN ESR", func(r *store.Reading) { r.ESRMilliohm = f(math.NaN()) }, nil, "esr_milliohm", "finite"},
			{"in the future", func(r *store.Reading) { r.At = future }, nil, "at", "5 minutes"},
			{"no time", func(r *store.Reading) { r.At = time.Time{} }, nil, "at", "required"},
			{"no position", func(r *store.Reading) { r.Position = "" }, nil, "position", "required"},
			{"unknown position", func(r *store.Reading) { r.Position = "X-404" }, nil, "position", `"X-404"`},
			{"unknown site", func(r *store.Reading) { r.Site = "Nowhere" }, nil, "position", `"Nowhere"`},
			{"no drive installed then", func(r *store.Reading) { r.At = time.Date(2019, 1, 1, 0, 0, 0, 0, time.UTC) }, nil, "at", "no drive was installed at position " + `"` + tag},
			{"no drive installed at the twin", func(r *store.Reading) { r.Site = other.Site.Name }, nil, "at", `site "Works b"`},
			{"repeat inside the batch", func(r *store.Reading) { r.At = day0 }, nil, "at", "repeats row 1"},
			{"position outside the token's sites", func(r *store.Reading) {}, store.WithPrincipal(ctx, store.Principal{Actor: "t", Sites: []int64{other.Site.ID}}), "position", tag},
		}
		// Without a site the tag is ambiguous now that two sites use it.
		ambiguous := good()
		ambiguous.Site = ""
		for _, c := range cases {
			t.Run(c.name, func(t *testing.T) {
				first := good()
				first.Site = fx.Site.Name
				bad := good()
				bad.Site = fx.Site.Name
				bad.At = day0.Add(time.Hour)
				bad.Line = 3
				c.edit(&bad)
				cctx := ctx
				if c.ctx != nil {
					cctx = c.ctx
					first.Site = ""
					first.Position = other.Position.Tag
					first.At = day0
				}
				_, err := s.Ingest(cctx, []store.Reading{first, bad}, store.IngestOptions{})
				var ve *store.ValidationError
				if !errors.As(err, &ve) {
					t.Fatalf("got %v, want a validation error", err)
				}
				if len(ve.Fields) != 1 || ve.Fields[0].Row != 2 || ve.Fields[0].Line != 3 || ve.Fields[0].Field != c.field ||
					!strings.Contains(ve.Fields[0].Reason, c.reason) {
					t.Errorf("errors %+v, want row 2 line 3 %s: …%s…", ve.Fields, c.field, c.reason)
				}
			})
		}
		_, err = s.Ingest(ctx, []store.Reading{ambiguous}, store.IngestOptions{})
		var ve *store.ValidationError
		if !errors.As(err, &ve) || len(ve.Fields) != 1 || ve.Fields[0].Field != "site" ||
			!strings.Contains(ve.Fields[0].Reason, `"Works a", "Works b"`) {
			t.Errorf("ambiguous tag: %v", err)
		}
		// Through the position endpoint the tag needs no site, and a row
		// naming another position is refused.
		res, err := s.Ingest(ctx, []store.Reading{{At: day0}}, store.IngestOptions{PositionID: fx.Position.ID})
		if err != nil || res.Inserted != 1 {
			t.Errorf("by position id: %+v, %v", res, err)
		}
		_, err = s.Ingest(ctx, []store.Reading{{At: day0, Position: "P-9"}}, store.IngestOptions{PositionID: fx.Position.ID})
		if !errors.As(err, &ve) || ve.Fields[0].Field != "position" {
			t.Errorf("row naming another position: %v", err)
		}
		if _, err := s.Ingest(ctx, []store.Reading{{At: day0}}, store.IngestOptions{PositionID: twin.ID + 100}); !errors.Is(err, store.ErrNotFound) {
			t.Errorf("unknown position id: %v, want not found", err)
		}
	})
}

func TestLateReadingMarksItsDriveForRecomputation(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		other := storetest.Build(t, s, "b")
		all := hourly(fx.Position.Tag, day0, 48)
		gap := func(h int) store.Reading { return all[h] }
		var first []store.Reading
		for h, r := range all {
			if h != 3 && h != 10 && h != 20 {
				first = append(first, r)
			}
		}
		if _, err := s.Ingest(ctx, first, store.IngestOptions{}); err != nil {
			t.Fatal(err)
		}
		if _, ok, err := s.Watermark(ctx, fx.Drive.ID); err != nil || ok {
			t.Fatalf("watermark before any assessment: ok=%v, %v", ok, err)
		}
		assessed := day0.Add(47 * time.Hour)
		if err := s.AdvanceWatermark(ctx, fx.Drive.ID, assessed, nil); err != nil {
			t.Fatal(err)
		}
		recomputeFrom := func() *time.Time {
			t.Helper()
			w, ok, err := s.Watermark(ctx, fx.Drive.ID)
			if err != nil || !ok || !w.AssessedTo.Equal(assessed) {
				t.Fatalf("watermark %+v ok=%v err=%v", w, ok, err)
			}
			return w.RecomputeFrom
		}
		if rf := recomputeFrom(); rf != nil {
			t.Fatalf("fresh watermark has recompute_from %v", rf)
		}
		step := func(rows []store.Reading, want *time.Time) {
			t.Helper()
			if _, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
				t.Fatal(err)
			}
			got := recomputeFrom()
			if (got == nil) != (want == nil) || (got != nil && !got.Equal(*want)) {
				t.Fatalf("recompute_from %v, want %v", got, want)
			}
		}
		// New readings after the watermark change nothing; neither does a
		// replay of readings already stored.
		step(hourly(fx.Position.Tag, assessed.Add(time.Hour), 2), nil)
		step(first[:5], nil)
		h10, h3 := gap(10).At, gap(3).At
		step([]store.Reading{gap(10)}, &h10)
		step([]store.Reading{gap(3)}, &h3)
		step([]store.Reading{gap(20)}, &h3)
		// A reading exactly at the watermark counts as late.
		if err := s.AdvanceWatermark(ctx, fx.Drive.ID, assessed, &h3); err != nil {
			t.Fatal(err)
		}
		if rf := recomputeFrom(); rf != nil {
			t.Fatalf("advance did not clear recompute_from: %v", rf)
		}
		atMark := hourly(fx.Position.Tag, assessed.Add(-30*time.Minute), 1)
		atMark[0].At = assessed.Add(-time.Minute)
		mark := atMark[0].At
		step(atMark, &mark)
		// An advance that handled an older mark keeps a newer one.
		if err := s.AdvanceWatermark(ctx, fx.Drive.ID, assessed, &h10); err != nil {
			t.Fatal(err)
		}
		if rf := recomputeFrom(); rf == nil || !rf.Equal(mark) {
			t.Fatalf("advance cleared a mark it had not handled: %v", rf)
		}
		// A batch that mixes a stored reading with a late new one goes
		// through the staging table; it marks the drive all the same.
		if err := s.AdvanceWatermark(ctx, fx.Drive.ID, assessed, &mark); err != nil {
			t.Fatal(err)
		}
		late := hourly(fx.Position.Tag, day0, 2)
		late[1].At = day0.Add(90 * time.Minute)
		early := late[1].At
		step(late, &early)
		// Other drives are untouched; a drive never assessed gets no row.
		if _, err := s.Ingest(ctx, hourly(other.Position.Tag, day0, 3), store.IngestOptions{}); err != nil {
			t.Fatal(err)
		}
		if _, ok, _ := s.Watermark(ctx, other.Drive.ID); ok {
			t.Error("ingest made a watermark for a drive never assessed")
		}
	})
}

func TestReadingsFollowTheDriveAcrossASwap(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		spare, err := store.Create(ctx, s, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID = "SPARE-1", fx.Model.ID, fx.Site.ID
			v.ManufacturedAt = time.Date(2021, 1, 1, 0, 0, 0, 0, time.UTC)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		swap := day0.Add(12 * time.Hour)
		if _, err := s.MoveDrive(ctx, spare.ID, store.Move{PositionID: &fx.Position.ID, At: swap}); err != nil {
			t.Fatal(err)
		}
		res, err := s.Ingest(ctx, hourly(fx.Position.Tag, day0, 24), store.IngestOptions{})
		if err != nil || res.Inserted != 24 {
			t.Fatalf("ingest across the swap: %+v, %v", res, err)
		}
		for _, c := range []struct {
			drive      int64
			n          int
			first, end time.Time
		}{{fx.Drive.ID, 12, day0, swap}, {spare.ID, 12, swap, day0.Add(24 * time.Hour)}} {
			page, err := s.Readings(ctx, c.drive, time.Time{}, time.Time{}, 0, "")
			if err != nil {
				t.Fatal(err)
			}
			if len(page.Items) != c.n || !page.Items[0].At.Equal(c.first) || !page.Items[c.n-1].At.Before(c.end) {
				t.Errorf("drive %d: %d readings from %v", c.drive, len(page.Items), page.Items[0].At)
			}
			for _, r := range page.Items {
				if r.DriveID != c.drive || r.PositionID != fx.Position.ID || r.Position != fx.Position.Tag {
					t.Fatalf("read back %+v", r)
				}
			}
		}
	})
}

func TestReadingsPagesAndScans(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		other := storetest.Build(t, s, "b")
		rows := hourly(fx.Position.Tag, day0, 5003)
		rows[7].AmbientC, rows[7].BusV = nil, nil
		rows[8].CapacitanceUF, rows[8].ESRMilliohm = f(4700), f(31.5)
		if res, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil || res.Inserted != 5003 {
			t.Fatalf("ingest: %+v, %v", res, err)
		}
		var seen []time.Time
		q, pages := "", 0
		from, to := day0.Add(2*time.Hour), day0.Add(27*time.Hour)
		for {
			page, err := s.Readings(ctx, fx.Drive.ID, from, to, 10, q)
			if err != nil {
				t.Fatal(err)
			}
			pages++
			for _, r := range page.Items {
				seen = append(seen, r.At)
			}
			if page.Next == "" {
				break
			}
			q = page.Next
		}
		if pages != 3 || len(seen) != 25 || !seen[0].Equal(from) || !seen[24].Equal(to.Add(-time.Hour)) {
			t.Errorf("paged %d readings over %d pages from %v", len(seen), pages, seen[0])
		}
		for i := 1; i < len(seen); i++ {
			if !seen[i].After(seen[i-1]) {
				t.Fatalf("pages not in time order: %v", seen)
			}
		}
		var ve *store.ValidationError
		for _, bad := range []func() error{
			func() error {
				_, err := s.Readings(ctx, fx.Drive.ID, time.Time{}, time.Time{}, store.MaxReadingsLimit+1, "")
				return err
			},
			func() error { _, err := s.Readings(ctx, fx.Drive.ID, time.Time{}, time.Time{}, 0, "%%"); return err },
			func() error { _, err := s.Readings(ctx, fx.Drive.ID, to, from, 0, ""); return err },
		} {
			if err := bad(); !errors.As(err, &ve) {
				t.Errorf("bad query: %v, want a validation error", err)
			}
		}
		limited := store.WithPrincipal(ctx, store.Principal{Actor: "t", Sites: []int64{other.Site.ID}})
		if _, err := s.Readings(limited, fx.Drive.ID, time.Time{}, time.Time{}, 0, ""); !errors.Is(err, store.ErrNotFound) {
			t.Errorf("another site's drive: %v, want not found", err)
		}
		if err := s.ScanSamples(limited, fx.Drive.ID, time.Time{}, time.Time{}, func(int64, health.Sample) error { return nil }); !errors.Is(err, store.ErrNotFound) {
			t.Errorf("scan of another site's drive: %v, want not found", err)
		}

		// The scan crosses its internal chunks in order and gives NaN for
		// what was not logged.
		n, last := 0, int64(0)
		err := s.ScanSamples(ctx, fx.Drive.ID, time.Time{}, time.Time{}, func(pos int64, smp health.Sample) error {
			if pos != fx.Position.ID || smp.At <= last {
				return fmt.Errorf("sample %d out of order or from position %d", n, pos)
			}
			last = smp.At
			switch n {
			case 7:
				if !math.IsNaN(smp.AmbientC) || !math.IsNaN(smp.BusV) || smp.InternalAirC != 31.5 {
					return fmt.Errorf("sample 7 %+v, want NaN ambient and bus", smp)
				}
			case 8:
				if smp.CapacitanceUF != 4700 || smp.ESRMilliohm != 31.5 || !math.IsNaN(smp.BusRippleV) {
					return fmt.Errorf("sample 8 %+v", smp)
				}
			}
			n++
			return nil
		})
		if err != nil || n != 5003 || last != day0.Add(5002*time.Hour).Unix() {
			t.Errorf("scan: %d samples to %d, %v", n, last, err)
		}
		stop := errors.New("enough")
		n = 0
		err = s.ScanSamples(ctx, fx.Drive.ID, day0.Add(time.Hour), time.Time{}, func(int64, health.Sample) error {
			if n++; n == 3 {
				return stop
			}
			return nil
		})
		if err != stop || n != 3 {
			t.Errorf("callback error: %v after %d samples, want it returned as is after 3", err, n)
		}
	})
}

// TestConcurrentIdenticalBatches posts the same new batch from several
// goroutines at once: each reading is stored once and every batch is
// answered, the ones that lost the race with already_present.
func TestConcurrentIdenticalBatches(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		fx := storetest.Build(t, s, "a")
		rows := hourly(fx.Position.Tag, day0, 500)
		const senders = 4
		results := make(chan store.IngestResult, senders)
		errs := make(chan error, senders)
		var wg sync.WaitGroup
		for range senders {
			wg.Go(func() {
				res, err := s.Ingest(ctx, rows, store.IngestOptions{})
				if err != nil {
					errs <- err
					return
				}
				results <- res
			})
		}
		wg.Wait()
		close(results)
		close(errs)
		for err := range errs {
			t.Fatalf("concurrent ingest: %v", err)
		}
		inserted, present := 0, 0
		for res := range results {
			inserted += res.Inserted
			present += res.AlreadyPresent
			if len(res.Conflicts) != 0 {
				t.Errorf("identical batches conflict: %+v", res.Conflicts[0])
			}
		}
		if inserted != 500 || present != 500*(senders-1) {
			t.Errorf("inserted %d and already present %d, want 500 and %d", inserted, present, 500*(senders-1))
		}
		if n := countReadings(t, s, fx.Drive.ID); n != 500 {
			t.Errorf("%d readings stored, want 500", n)
		}
	})
}

// TestReplicaReplayDespiteStaleHint replays, through one replica, readings
// another replica stored after the first one's last batch: the first
// replica's hint says they are new, the COPY meets them and the retry
// reports them as already present (and a changed one as a conflict).
func TestReplicaReplayDespiteStaleHint(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			ctx := context.Background()
			url := storetest.URL(t, d)
			open := func() *store.Store {
				s, err := store.Open(ctx, url, store.Options{})
				if err != nil {
					t.Fatal(err)
				}
				t.Cleanup(func() { s.Close() })
				if _, err := s.Migrate(ctx); err != nil {
					t.Fatal(err)
				}
				return s
			}
			a, b := open(), open()
			fx := storetest.Build(t, a, "a")
			if res, err := a.Ingest(ctx, hourly(fx.Position.Tag, day0, 10), store.IngestOptions{}); err != nil || res.Inserted != 10 {
				t.Fatalf("first batch on replica a: %+v, %v", res, err)
			}
			later := hourly(fx.Position.Tag, day0.Add(10*time.Hour), 10)
			if res, err := b.Ingest(ctx, later, store.IngestOptions{}); err != nil || res.Inserted != 10 {
				t.Fatalf("second batch on replica b: %+v, %v", res, err)
			}
			replay := hourly(fx.Position.Tag, day0.Add(10*time.Hour), 11)
			replay[4].BusV = f(600)
			res, err := a.Ingest(ctx, replay, store.IngestOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if res.Inserted != 1 || res.AlreadyPresent != 9 || len(res.Conflicts) != 1 || res.Conflicts[0].Row != 5 {
				t.Errorf("replay through replica a: %+v", res)
			}
			if n := countReadings(t, a, fx.Drive.ID); n != 21 {
				t.Errorf("%d readings stored, want 21", n)
			}
		})
	}
}
