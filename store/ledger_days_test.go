package store_test

import (
	"context"
	"reflect"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestLedgerDaysInChunks: a drive's ledgers come back as saved whatever
// changed; a save writes only the chunks of closed days that changed (none
// when only the open day moved, one when a day closes) and deletes the
// chunks left without a day; ledgers stored by earlier versions (closed
// days in the ledger column, or in the days column) read back as they are
// and move into chunks at their next save.
func TestLedgerDaysInChunks(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "days")
		at := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
		today := int32(at.Unix() / 86400)
		// ledger has closed days first..last and an open day after them.
		ledger := func(first, last int32, current float64) health.LifeLedger {
			l := health.LifeLedger{HasLast: true, LastAt: int64(last+1)*86400 + 3600, Damage: 0.2 + current, Samples: int64(last-first+1) * 24,
				HasCurrent: true, Current: health.DayDamage{Day: last + 1, Damage: current, Seconds: 3600, AgingS: 3600, TempS: 1.4e5}}
			for d := first; d <= last; d++ {
				l.Days = append(l.Days, health.DayDamage{Day: d, Damage: 0.001 * float64(d%97+1), Seconds: 86400, AgingS: 86400, TempS: 3.3e6})
			}
			return l
		}
		chunksOf := func(ls ...health.LifeLedger) int {
			n := 0
			for _, l := range ls {
				seen := map[int32]bool{}
				for _, d := range l.Days {
					seen[floorDiv(d.Day, store.DayChunkDays)] = true
				}
				n += len(seen)
			}
			return n
		}
		load := func() *store.DriveState {
			t.Helper()
			cs, err := s.LoadAssessContexts(ctx, []int64{f.Drive.ID}, at)
			if err != nil {
				t.Fatal(err)
			}
			if cs[0].State == nil {
				t.Fatal("no state saved")
			}
			return cs[0].State
		}
		save := func(cap, fan health.LifeLedger, stored *store.DriveState) int {
			t.Helper()
			st := store.DriveState{CapacitorState: health.CapacitorState{LifeLedger: cap}, FanState: health.FanState{LifeLedger: fan}, ParamsHash: "h"}
			st.CarryStored(stored)
			rs := []store.AssessResult{{DriveID: f.Drive.ID, SiteID: f.Site.ID, SaveState: true, State: st,
				Assessment: health.DriveAssessment{At: at.Unix()}, AssessedTo: &at}}
			if err := s.SaveAssessments(ctx, rs, store.SaveOptions{}); err != nil {
				t.Fatal(err)
			}
			return store.SentDayChunks(&rs[0].State)
		}
		stored := func() int64 {
			t.Helper()
			var n int64
			if err := s.DB(ctx).Table("ledger_day_chunks").Where("drive_id = ?", f.Drive.ID).Count(&n).Error; err != nil {
				t.Fatal(err)
			}
			return n
		}
		check := func(what string, got *store.DriveState, cap, fan health.LifeLedger) {
			t.Helper()
			for _, c := range []struct {
				name      string
				got, want health.LifeLedger
			}{{"capacitor", got.CapacitorState.LifeLedger, cap}, {"fan", got.FanState.LifeLedger, fan}} {
				if !reflect.DeepEqual(c.got, c.want) {
					t.Errorf("%s: %s ledger read back with %d closed days, open day %+v, damage %v; want %d, %+v, %v", what, c.name,
						len(c.got.Days), c.got.Current, c.got.Damage, len(c.want.Days), c.want.Current, c.want.Damage)
				}
			}
			if n, want := stored(), int64(chunksOf(cap, fan)); n != want {
				t.Errorf("%s: %d chunks stored, want %d", what, n, want)
			}
		}

		c1, f1 := ledger(today-300, today-1, 0.01), ledger(today-2, today-1, 0.5)
		if n, want := save(c1, f1, nil), chunksOf(c1, f1); n != want {
			t.Errorf("first save sent %d chunks, want %d", n, want)
		}
		st := load()
		check("first save", st, c1, f1)

		// More readings within the open day, the closed days rebuilt
		// equal (as a full recompute does): no chunk is sent.
		c2, f2 := ledger(today-300, today-1, 0.02), ledger(today-2, today-1, 0.6)
		if n := save(c2, f2, st); n != 0 {
			t.Errorf("open day moved on: %d chunks sent, want none", n)
		}
		st = load()
		check("open day moved on", st, c2, f2)

		// The same ledgers as loaded, advanced in place: nothing to encode.
		if n := save(st.CapacitorState.LifeLedger, st.FanState.LifeLedger, st); n != 0 {
			t.Errorf("unchanged: %d chunks sent, want none", n)
		}

		// A day closes on the capacitor ledger only: one chunk.
		c3 := ledger(today-300, today, 0.001)
		if n := save(c3, f2, st); n != 1 {
			t.Errorf("a day closed: %d chunks sent, want 1", n)
		}
		st = load()
		check("a day closed", st, c3, f2)

		// The oldest days drop out, emptying a chunk: it is deleted. A
		// closed day's values change in an old chunk: it is rewritten.
		first := (floorDiv(today-300, store.DayChunkDays) + 1) * store.DayChunkDays
		c4 := ledger(first, today, 0.001)
		c4.Days[10].Damage *= 2
		if n := save(c4, f2, st); n != 2 {
			t.Errorf("oldest days dropped, one changed: %d chunks sent, want 2 (a delete and a rewrite)", n)
		}
		st = load()
		check("oldest days dropped", st, c4, f2)

		// A new component: the fan ledger starts again, its chunks go.
		f5 := health.LifeLedger{HasLast: true, LastAt: at.Unix(), HasCurrent: true,
			Current: health.DayDamage{Day: today, Damage: 0.001, Seconds: 3600, AgingS: 3600, TempS: 1e5}}
		save(c4, f5, st)
		st = load()
		check("new fan", st, c4, f5)

		// Ledgers as earlier versions stored them: whole in the ledger
		// column (days column NULL), or with the days in the days column.
		whole, err := c3.MarshalBinary()
		if err != nil {
			t.Fatal(err)
		}
		head, days, err := f1.MarshalSplit()
		if err != nil {
			t.Fatal(err)
		}
		if err := s.DB(ctx).Exec("DELETE FROM ledger_day_chunks WHERE drive_id = ?", f.Drive.ID).Error; err != nil {
			t.Fatal(err)
		}
		if err := s.DB(ctx).Exec("UPDATE drive_state SET capacitor_state = ?, capacitor_days = NULL, fan_state = ?, fan_days = ? WHERE drive_id = ?",
			whole, head, days, f.Drive.ID).Error; err != nil {
			t.Fatal(err)
		}
		st = load()
		if !reflect.DeepEqual(st.CapacitorState.LifeLedger, c3) || !reflect.DeepEqual(st.FanState.LifeLedger, f1) {
			t.Fatal("ledgers stored by earlier versions did not read back")
		}
		if n, want := save(c3, f1, st), chunksOf(c3, f1); n != want {
			t.Errorf("moving earlier ledgers into chunks sent %d, want %d", n, want)
		}
		st = load()
		check("earlier ledgers moved", st, c3, f1)
		if n := save(c3, f1, st); n != 0 {
			t.Errorf("after the move: %d chunks sent, want none", n)
		}
	})
}

// floorDiv divides rounding down.
func floorDiv(a, b int32) int32 {
	q := a / b
	if a%b < 0 {
		q--
	}
	return q
}
