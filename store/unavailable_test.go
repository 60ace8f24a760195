package store_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestLostDatabaseIsUnavailable cuts the connection to PostgreSQL under
// the store, idle and in the middle of a transaction: every failure is
// ErrUnavailable (the api answers 503 with Retry-After, not 500), and the
// store works again once the database is back.
func TestLostDatabaseIsUnavailable(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	s, proxy := storetest.OpenCut(t)
	f := storetest.Build(t, s, "cut")
	v := 21.0
	rows := []store.Reading{{Position: f.Position.Tag, At: time.Date(2021, 2, 1, 0, 0, 0, 0, time.UTC), AmbientC: &v}}

	unavailable := func(what string, err error) {
		t.Helper()
		if !errors.Is(err, store.ErrUnavailable) {
			t.Errorf("%s with the database gone: %v, want ErrUnavailable", what, err)
		}
	}
	proxy.Cut()
	_, err := store.List[store.Site](ctx, s, store.ListQuery{})
	unavailable("list", err)
	_, err = s.Ingest(ctx, rows, store.IngestOptions{})
	unavailable("ingest", err)
	_, err = s.Authenticate(ctx, "kvd_abcdefgh_0123456789")
	unavailable("authenticate", err)
	proxy.Restore()

	// Cut in the middle of a transaction that has already written.
	err = s.InTx(ctx, func(tx *store.Tx) error {
		if _, err := store.CreateIn(ctx, tx, func(v *store.Site) error {
			v.Name, v.AmbientMinC, v.AmbientMaxC = "Half written", 0, 30
			return nil
		}); err != nil {
			return err
		}
		proxy.Cut()
		_, err := store.CreateIn(ctx, tx, func(v *store.Site) error {
			v.Name, v.AmbientMinC, v.AmbientMaxC = "Never written", 0, 30
			return nil
		})
		return err
	})
	unavailable("a transaction cut in the middle", err)
	proxy.Restore()

	// Back: the pool drops its dead connections and nothing half written
	// remains.
	res, err := s.Ingest(ctx, rows, store.IngestOptions{})
	if err != nil || res.Inserted != 1 {
		t.Fatalf("ingest after the database came back: %+v %v", res, err)
	}
	page, err := store.List[store.Site](ctx, s, store.ListQuery{})
	if err != nil || len(page.Items) != 1 {
		t.Fatalf("sites after the database came back: %d, %v", len(page.Items), err)
	}
}
