package store_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

func TestInTxRollsBackEverything(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		boom := errors.New("boom")
		err := s.InTx(ctx, func(tx *store.Tx) error {
			if _, err := store.CreateIn(ctx, tx, func(v *store.Site) error {
				v.Name, v.AmbientMinC, v.AmbientMaxC = "Rolled back", 0, 30
				return nil
			}); err != nil {
				return err
			}
			return boom
		})
		if !errors.Is(err, boom) {
			t.Fatalf("InTx: %v, want the function's error", err)
		}
		page, err := store.List[store.Site](ctx, s, store.ListQuery{})
		if err != nil || len(page.Items) != 0 {
			t.Fatalf("after a rolled-back transaction: %d sites, %v", len(page.Items), err)
		}
		audit, err := s.Audit(ctx, store.AuditQuery{})
		if err != nil || len(audit.Items) != 0 {
			t.Errorf("after a rolled-back transaction: %d audit rows, %v", len(audit.Items), err)
		}
	})
}

// TestSavepointKeepsTheTransaction: a duplicate key inside a savepoint is
// undone without spoiling the transaction (on PostgreSQL a failed
// statement otherwise aborts every later one).
func TestSavepointKeepsTheTransaction(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		site := func(name string) func(*store.Site) error {
			return func(v *store.Site) error {
				v.Name, v.AmbientMinC, v.AmbientMaxC = name, 0, 30
				return nil
			}
		}
		err := s.InTx(ctx, func(tx *store.Tx) error {
			if _, err := store.CreateIn(ctx, tx, site("First")); err != nil {
				return err
			}
			err := tx.Savepoint(func(tx *store.Tx) error {
				_, err := store.CreateIn(ctx, tx, site("First"))
				return err
			})
			if !errors.Is(err, store.ErrDuplicate) {
				t.Errorf("duplicate inside a savepoint: %v, want ErrDuplicate", err)
			}
			_, err = store.CreateIn(ctx, tx, site("Second"))
			return err
		})
		if err != nil {
			t.Fatalf("transaction after a failed savepoint: %v", err)
		}
		page, err := store.List[store.Site](ctx, s, store.ListQuery{})
		if err != nil || len(page.Items) != 2 {
			t.Fatalf("%d sites, %v; want First and Second", len(page.Items), err)
		}
	})
}

func TestUpdateInReportsChange(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "a")
		before, err := s.Audit(ctx, store.AuditQuery{Resource: "sites"})
		if err != nil {
			t.Fatal(err)
		}
		var first, second bool
		err = s.InTx(ctx, func(tx *store.Tx) error {
			if _, first, err = store.UpdateIn(ctx, tx, f.Site.ID, func(v *store.Site) error {
				v.ElevationM = f.Site.ElevationM
				return nil
			}); err != nil {
				return err
			}
			_, second, err = store.UpdateIn(ctx, tx, f.Site.ID, func(v *store.Site) error {
				v.Notes = "coastal"
				return nil
			})
			return err
		})
		if err != nil {
			t.Fatal(err)
		}
		if first || !second {
			t.Errorf("changed = %v for a no-op and %v for a real change; want false, true", first, second)
		}
		after, err := s.Audit(ctx, store.AuditQuery{Resource: "sites"})
		if err != nil {
			t.Fatal(err)
		}
		if len(after.Items) != len(before.Items)+1 {
			t.Errorf("audit rows %d → %d, want one more (the no-op is not audited)", len(before.Items), len(after.Items))
		}
		got, err := store.Get[store.Site](ctx, s, f.Site.ID)
		if err != nil || got.Notes != "coastal" {
			t.Errorf("site after UpdateIn: %+v, %v", got, err)
		}
	})
}

func TestTxMoveDrive(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "a")
		at := time.Date(2023, 2, 1, 0, 0, 0, 0, time.UTC)
		err := s.InTx(ctx, func(tx *store.Tx) error {
			if _, err := tx.MoveDrive(ctx, f.Drive.ID, store.Move{At: at, Status: health.StatusInRepair}); err != nil {
				return err
			}
			d, err := store.GetIn[store.Drive](ctx, tx, f.Drive.ID)
			if err != nil {
				return err
			}
			if d.Status != health.StatusInRepair {
				t.Errorf("inside the transaction the drive is %s, want in_repair", d.Status)
			}
			return errors.New("undo")
		})
		if err == nil {
			t.Fatal("InTx swallowed the error")
		}
		d, err := store.Get[store.Drive](ctx, s, f.Drive.ID)
		if err != nil || d.Status != health.StatusInstalled {
			t.Errorf("a rolled-back move left the drive %s, %v", d.Status, err)
		}
	})
}
