package demo

import (
	"cmp"
	"context"
	"slices"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestRegisterAcceptsTheDemoFleet loads the demo register into a fresh
// store, on PostgreSQL and on SQLite, through the register's own operations
// (store.Create and Store.MoveDrive, which validate every field), resolving
// the natural keys as an importer would. Then every drive must end in the
// status, site, position and last-energised time the CSV files say.
func TestRegisterAcceptsTheDemoFleet(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("loads about fifteen hundred rows into two stores")
	}
	sc := demoScenario()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			// The register refuses times in its future: pin its clock just
			// after the scenario's Now.
			st := storetest.OpenWith(t, d, store.Options{Now: func() time.Time { return sc.Now.Add(time.Minute) }})
			loadRegister(t, st, sc)
		})
	}
}

func loadRegister(t *testing.T, st *store.Store, sc *Scenario) {
	ctx := context.Background()
	must := func(what string, err error) {
		t.Helper()
		if err != nil {
			t.Fatalf("%s: %v", what, err)
		}
	}
	sites := map[string]int64{}
	for _, row := range sc.Sites {
		v, err := store.Create(ctx, st, func(s *store.Site) error { *s = row; return nil })
		must("site "+row.Name, err)
		sites[row.Name] = v.ID
	}
	areas := map[[2]string]int64{}
	for _, row := range sc.Areas {
		v, err := store.Create(ctx, st, func(a *store.Area) error { *a = row.Area; a.SiteID = sites[row.Site]; return nil })
		must("area "+row.Name, err)
		areas[[2]string{row.Site, row.Name}] = v.ID
	}
	models := map[string]int64{}
	for _, row := range sc.Models {
		v, err := store.Create(ctx, st, func(m *store.DriveModel) error { *m = row; return nil })
		must("model "+row.Name, err)
		models[row.Name] = v.ID
	}
	positions := map[string]int64{}
	for _, row := range sc.Positions {
		v, err := store.Create(ctx, st, func(p *store.Position) error {
			*p = row.Position
			p.AreaID = areas[[2]string{row.Site, row.Area}]
			return nil
		})
		must("position "+row.Tag, err)
		positions[row.Tag] = v.ID
	}
	drives := map[string]int64{}
	for _, row := range sc.Drives {
		v, err := store.Create(ctx, st, func(d *store.Drive) error {
			def := d.Status
			*d = row.Drive
			if d.Status == "" {
				d.Status = def // not given: the register's default
			}
			d.ModelID, d.SiteID = models[row.Model], sites[row.Site]
			if row.StoresArea != "" {
				id := areas[[2]string{row.Site, row.StoresArea}]
				d.StoresAreaID = &id
			}
			return nil
		})
		must("drive "+row.Serial, err)
		drives[row.Serial] = v.ID
	}

	// Installations become moves in time order: a removal before an
	// installation at the same instant.
	type move struct {
		at     time.Time
		remove bool
		in     Installation
	}
	var moves []move
	for _, in := range sc.Installations {
		moves = append(moves, move{at: in.InstalledAt, in: in})
		if in.RemovedAt != nil {
			moves = append(moves, move{at: *in.RemovedAt, remove: true, in: in})
		}
	}
	slices.SortStableFunc(moves, func(a, b move) int {
		if c := a.at.Compare(b.at); c != 0 {
			return c
		}
		if a.remove != b.remove {
			if a.remove {
				return -1
			}
			return 1
		}
		return cmp.Compare(a.in.Serial, b.in.Serial)
	})
	for _, m := range moves {
		mv := store.Move{At: m.at}
		if m.remove {
			mv.Status = m.in.StatusAfter
		} else {
			id := positions[m.in.Position]
			mv.PositionID = &id
		}
		_, err := st.MoveDrive(ctx, drives[m.in.Serial], mv)
		must("move "+m.in.Serial+" at "+m.at.Format(time.RFC3339), err)
	}

	for _, row := range sc.Components {
		_, err := store.Create(ctx, st, func(c *store.Component) error { *c = row.Component; c.DriveID = drives[row.Serial]; return nil })
		must("component of "+row.Serial, err)
	}
	for _, row := range sc.Events {
		_, err := store.Create(ctx, st, func(e *store.Event) error {
			*e = row.Event
			e.DriveID = drives[row.Serial]
			if row.Position != "" {
				id := positions[row.Position]
				e.PositionID = &id
			}
			return nil
		})
		must("event of "+row.Serial+" at "+row.At.Format(time.RFC3339), err)
	}

	for _, row := range sc.Drives {
		got, err := store.Get[store.Drive](ctx, st, drives[row.Serial])
		must("get drive "+row.Serial, err)
		want := row.Status
		if want == "" {
			want = health.StatusInstalled
		}
		if got.Status != want {
			t.Errorf("drive %s ends %s, the CSV says %s", row.Serial, got.Status, want)
		}
		if want == health.StatusInstalled && (got.PositionID == nil || got.SiteID != sites[row.Site]) {
			t.Errorf("installed drive %s: position %v site %d, want a position at %s", row.Serial, got.PositionID, got.SiteID, row.Site)
		}
		// The replay sets last_energised_at to the last removal, which is
		// never after the CSV's value (a repaired unit is energised on the
		// bench after it leaves its position): either way storage advice
		// sees a date no later than the one TestPlantedStorage holds.
		if row.LastEnergisedAt != nil && (got.LastEnergisedAt == nil || got.LastEnergisedAt.After(*row.LastEnergisedAt)) {
			t.Errorf("drive %s: last energised %v in the register, %v in the CSV", row.Serial, got.LastEnergisedAt, row.LastEnergisedAt)
		}
	}
}
