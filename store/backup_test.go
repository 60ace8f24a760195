package store_test

import (
	"context"
	"errors"
	"path/filepath"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestBackupWhileIngesting copies an embedded store while a collector keeps
// posting batches, and checks that the copy is a consistent snapshot: it
// passes SQLite's integrity check, opens as a kelvard store with its
// register, and holds only whole batches (each batch is one transaction).
// A PostgreSQL store refuses and points at pg_dump.
func TestBackupWhileIngesting(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		dst := filepath.Join(t.TempDir(), "copy.db")
		if s.Dialect() == store.Postgres {
			if err := s.BackupTo(ctx, dst); !errors.Is(err, store.ErrBackupNeedsPgDump) {
				t.Fatalf("backup of a PostgreSQL store: %v, want ErrBackupNeedsPgDump", err)
			}
			return
		}
		f := storetest.Build(t, s, "b")
		const batch = 250
		start := time.Date(2025, 1, 1, 0, 0, 0, 0, time.UTC)
		var sent atomic.Int64
		stop := make(chan struct{})
		var wg sync.WaitGroup
		wg.Add(1)
		go func() {
			defer wg.Done()
			for k := 0; ; k++ {
				select {
				case <-stop:
					return
				default:
				}
				rows := make([]store.Reading, batch)
				for i := range rows {
					air := 30.0 + float64(i%10)
					rows[i] = store.Reading{PositionID: f.Position.ID, At: start.Add(time.Duration(k*batch+i) * time.Minute), InternalAirC: &air}
				}
				if _, err := s.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
					t.Errorf("ingest batch %d: %v", k, err)
					return
				}
				sent.Add(batch)
			}
		}()
		for sent.Load() < 4*batch {
			time.Sleep(5 * time.Millisecond)
		}
		err := s.BackupTo(ctx, dst)
		close(stop)
		wg.Wait()
		if err != nil {
			t.Fatal(err)
		}
		if err := s.BackupTo(ctx, dst); err == nil {
			t.Error("a second backup over an existing file was not refused")
		}

		cp, err := store.Open(ctx, "sqlite:"+dst, store.Options{})
		if err != nil {
			t.Fatalf("open the copy: %v", err)
		}
		defer cp.Close()
		var check string
		if err := cp.DB(ctx).Raw("PRAGMA integrity_check").Scan(&check).Error; err != nil || check != "ok" {
			t.Fatalf("integrity check of the copy: %q %v", check, err)
		}
		var n int64
		if err := cp.DB(ctx).Table("readings").Count(&n).Error; err != nil {
			t.Fatal(err)
		}
		if n == 0 || n%batch != 0 || n > sent.Load() {
			t.Errorf("the copy holds %d readings: want whole batches of %d, at most the %d sent", n, batch, sent.Load())
		}
		d, err := store.Get[store.Drive](ctx, cp, f.Drive.ID)
		if err != nil || d.Serial != f.Drive.Serial {
			t.Errorf("drive in the copy: %+v %v", d, err)
		}
		t.Logf("copy holds %d of %d readings sent", n, sent.Load())
	})
}
