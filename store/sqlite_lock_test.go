package store_test

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"strings"
	"sync"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestSQLiteTransactionsTakeTheWriteLockAtBegin: on SQLite every
// read-write transaction begins IMMEDIATE, so a second writer waits at its
// BEGIN instead of failing with "database is locked" when a transaction
// that has already read tries to write. The DSN asks for it with
// _txlock=immediate, which the driver ignores when _time_format is also
// given, so the DSN gives no _time_format.
func TestSQLiteTransactionsTakeTheWriteLockAtBegin(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	url := storetest.URL(t, store.SQLite)
	s, err := store.Open(ctx, url, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	if _, err := s.Migrate(ctx); err != nil {
		t.Fatal(err)
	}
	// A second connection to the file that does not wait for locks, so
	// a held write lock shows at once.
	other, err := sql.Open("sqlite", "file:"+strings.TrimPrefix(url, "sqlite:")+"?_pragma=busy_timeout(0)")
	if err != nil {
		t.Fatal(err)
	}
	defer other.Close()
	write := func(table string) error {
		_, err := other.ExecContext(ctx, "CREATE TABLE "+table+" (x INTEGER)")
		return err
	}

	tx, err := s.SQL().BeginTx(ctx, nil)
	if err != nil {
		t.Fatal(err)
	}
	// The transaction has run no statement yet: only an immediate BEGIN
	// holds the write lock now.
	if err := write("probe_during"); err == nil {
		t.Fatal("another connection wrote while a transaction was open: the transaction did not take the write lock at BEGIN")
	}
	if err := tx.Rollback(); err != nil {
		t.Fatal(err)
	}
	if err := write("probe_after"); err != nil {
		t.Fatalf("write after the transaction ended: %v", err)
	}

	// A read-only transaction takes no write lock.
	ro, err := s.SQL().BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Rollback()
	var n int
	if err := ro.QueryRowContext(ctx, "SELECT count(*) FROM sites").Scan(&n); err != nil || n != 0 {
		t.Fatalf("read in a read-only transaction: %d sites, %v", n, err)
	}
	if err := write("probe_beside_reader"); err != nil {
		t.Fatalf("write beside a read-only transaction: %v", err)
	}

	// The store's own transactions commit and roll back through it.
	if _, err := store.Create(ctx, s, func(v *store.Site) error {
		v.Name, v.AmbientMinC, v.AmbientMaxC = "Committed", 0, 30
		return nil
	}); err != nil {
		t.Fatalf("create in a transaction: %v", err)
	}
}

// TestConcurrentIngestOnBothStores: writers posting batches at once all
// succeed; none is refused because another holds the database.
func TestConcurrentIngestOnBothStores(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		const writers, batches, size = 6, 15, 40
		var tags []string
		for i := range writers {
			f := storetest.Build(t, s, fmt.Sprint(i))
			tags = append(tags, f.Position.Tag)
		}
		start := time.Date(2021, 1, 1, 0, 0, 0, 0, time.UTC)
		var wg sync.WaitGroup
		errs := make(chan error, writers*batches)
		for w := range writers {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for b := range batches {
					rows := make([]store.Reading, size)
					for i := range rows {
						v := float64(20 + i%10)
						rows[i] = store.Reading{Position: tags[w], At: start.Add(time.Duration(b*size+i) * time.Minute), AmbientC: &v}
					}
					res, err := s.Ingest(ctx, rows, store.IngestOptions{})
					if err == nil && res.Inserted != size {
						err = fmt.Errorf("inserted %d of %d", res.Inserted, size)
					}
					if err != nil {
						errs <- fmt.Errorf("writer %d batch %d: %w", w, b, err)
					}
				}
			}()
		}
		wg.Wait()
		close(errs)
		var all []error
		for err := range errs {
			all = append(all, err)
		}
		if err := errors.Join(all...); err != nil {
			t.Fatalf("%d of %d batches failed: %v", len(all), writers*batches, err)
		}
	})
}
