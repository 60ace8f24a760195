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

// TestLedgerDaysKeptApart: a drive's ledgers come back as saved whether
// their closed days changed or not; unchanged closed days are left as
// stored (the save sends none); and a ledger stored whole, as before the
// days were split, reads back and is split by its next save.
func TestLedgerDaysKeptApart(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "days")
		at := time.Date(2026, 6, 1, 12, 0, 0, 0, time.UTC)
		day := int32(at.Unix() / 86400)
		ledger := func(closed int, current float64) health.LifeLedger {
			l := health.LifeLedger{HasLast: true, LastAt: at.Unix(), Damage: 0.2 + current, Samples: int64(closed * 24),
				HasCurrent: true, Current: health.DayDamage{Day: day, Damage: current, Seconds: 3600, AgingS: 3600, TempS: 1.4e5}}
			for d := range closed {
				l.Days = append(l.Days, health.DayDamage{Day: day - int32(closed-d), Damage: 0.001 * float64(d+1),
					Seconds: 86400, AgingS: 86400, TempS: 3.3e6})
			}
			return l
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
		save := func(cap, fan health.LifeLedger, stored *store.DriveState) store.DriveState {
			t.Helper()
			st := store.DriveState{CapacitorState: health.CapacitorState{LifeLedger: cap}, FanState: health.FanState{LifeLedger: fan}, ParamsHash: "h"}
			if stored != nil {
				st.CapacitorDays, st.FanDays = stored.CapacitorDays, stored.FanDays
			}
			rs := []store.AssessResult{{DriveID: f.Drive.ID, SiteID: f.Site.ID, SaveState: true, State: st,
				Assessment: health.DriveAssessment{At: at.Unix()}, AssessedTo: &at}}
			if err := s.SaveAssessments(ctx, rs, store.SaveOptions{}); err != nil {
				t.Fatal(err)
			}
			return rs[0].State
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
		}

		c1, f1 := ledger(300, 0.01), ledger(2, 0.5)
		save(c1, f1, nil)
		st := load()
		check("first save", st, c1, f1)
		if st.CapacitorDays == nil || st.FanDays == nil {
			t.Fatal("closed days not stored apart")
		}

		// More readings within the open day: the days are not sent.
		c2, f2 := ledger(300, 0.02), ledger(2, 0.6)
		sent := save(c2, f2, st)
		if sent.CapacitorDays != nil || sent.FanDays != nil {
			t.Error("unchanged closed days were sent again")
		}
		st = load()
		check("open day moved on", st, c2, f2)

		// A day closed on the capacitor ledger only.
		c3 := ledger(301, 0.001)
		sent = save(c3, f2, st)
		if sent.CapacitorDays == nil || sent.FanDays != nil {
			t.Errorf("a closed day: capacitor days sent %v, fan days sent %v", sent.CapacitorDays != nil, sent.FanDays != nil)
		}
		st = load()
		check("a day closed", st, c3, f2)

		// A ledger stored whole, as before the split.
		whole, err := c3.MarshalBinary()
		if err != nil {
			t.Fatal(err)
		}
		if err := s.DB(ctx).Exec("UPDATE drive_state SET capacitor_state = ?, capacitor_days = NULL WHERE drive_id = ?", whole, f.Drive.ID).Error; err != nil {
			t.Fatal(err)
		}
		st = load()
		check("stored whole", st, c3, f2)
		if st.CapacitorDays != nil {
			t.Fatal("a ledger stored whole came back with days apart")
		}
		save(c3, f2, st)
		st = load()
		check("stored whole, saved again", st, c3, f2)
		if st.CapacitorDays == nil {
			t.Error("the next save left the ledger whole")
		}
	})
}
