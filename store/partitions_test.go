package store_test

import (
	"context"
	"sync"
	"testing"
	"time"

	"kelvard/store"
	"kelvard/store/storetest"
)

func TestReadingPartitions(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			ctx := context.Background()
			url := storetest.URL(t, d)
			now := time.Date(2026, 11, 20, 8, 0, 0, 0, time.UTC)
			open := func() *store.Store {
				s, err := store.Open(ctx, url, store.Options{Now: func() time.Time { return now }})
				if err != nil {
					t.Fatal(err)
				}
				t.Cleanup(func() { s.Close() })
				if _, err := s.Migrate(ctx); err != nil {
					t.Fatal(err)
				}
				return s
			}
			s := open()
			if d == store.SQLite {
				if err := s.PrepareReadingPartitions(ctx); err != nil {
					t.Fatal(err)
				}
				if parts, err := s.ReadingPartitions(ctx); err != nil || parts != nil {
					t.Errorf("SQLite has partitions %v, %v", parts, err)
				}
				return
			}

			// A row written straight into a month with no partition lands
			// in DEFAULT; making the partition moves it.
			if _, err := s.SQL().ExecContext(ctx, "INSERT INTO readings (drive_id, at, position_id, ambient_c) VALUES (1, '2023-01-15T00:00:00Z', 1, 20), (1, '2023-02-01T00:00:00Z', 1, 21)"); err != nil {
				t.Fatal(err)
			}
			count := func(table string) int {
				var n int
				if err := s.SQL().QueryRowContext(ctx, "SELECT count(*) FROM "+table).Scan(&n); err != nil {
					t.Fatal(err)
				}
				return n
			}
			if count("readings_default") != 2 {
				t.Fatal("rows did not land in the default partition")
			}

			// Several replicas making the same partitions at once.
			var wg sync.WaitGroup
			errs := make(chan error, 4)
			stores := []*store.Store{s, open(), open(), open()}
			for _, st := range stores {
				wg.Go(func() {
					errs <- st.EnsureReadingPartitions(ctx, time.Date(2022, 12, 31, 0, 0, 0, 0, time.UTC), time.Date(2023, 1, 1, 0, 0, 0, 0, time.UTC))
				})
			}
			wg.Wait()
			close(errs)
			for err := range errs {
				if err != nil {
					t.Fatalf("concurrent partition making: %v", err)
				}
			}
			if count("readings_default") != 1 || count("readings_p202301") != 1 || count("readings_p202212") != 0 {
				t.Errorf("after making January: %d rows in default, %d in January", count("readings_default"), count("readings_p202301"))
			}
			if err := s.PrepareReadingPartitions(ctx); err != nil {
				t.Fatal(err)
			}
			parts, err := s.ReadingPartitions(ctx)
			if err != nil {
				t.Fatal(err)
			}
			var names []string
			for _, p := range parts {
				names = append(names, p.Format("2006-01"))
			}
			want := []string{"2022-12", "2023-01", "2026-11", "2026-12", "2027-01", "2027-02"}
			if len(names) != len(want) {
				t.Fatalf("partitions %v, want %v", names, want)
			}
			for i := range want {
				if names[i] != want[i] {
					t.Fatalf("partitions %v, want %v", names, want)
				}
			}

			// The ingest makes the month it needs before it writes, so
			// DEFAULT takes nothing.
			fx := storetest.Build(t, s, "a")
			if _, err := s.Ingest(ctx, hourly(fx.Position.Tag, time.Date(2023, 2, 2, 0, 0, 0, 0, time.UTC), 3), store.IngestOptions{}); err != nil {
				t.Fatal(err)
			}
			if count("readings_default") != 0 || count("readings_p202302") != 4 {
				t.Errorf("after an ingest in February: %d rows in default, %d in February", count("readings_default"), count("readings_p202302"))
			}
			if err := s.EnsureReadingPartitions(ctx, now, now.AddDate(-1, 0, 0)); err == nil {
				t.Error("a reversed range was accepted")
			}
		})
	}
}

func TestIdempotencyKeys(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			ctx := context.Background()
			var mu sync.Mutex
			now := time.Date(2026, 11, 20, 8, 0, 0, 0, time.UTC)
			clock := func() time.Time { mu.Lock(); defer mu.Unlock(); return now }
			advance := func(dt time.Duration) { mu.Lock(); now = now.Add(dt); mu.Unlock() }
			s := storetest.OpenWith(t, d, store.Options{Now: clock})
			a, _, err := s.CreateToken(ctx, store.NewToken{Name: "a", Role: store.RoleIngest})
			if err != nil {
				t.Fatal(err)
			}
			b, _, err := s.CreateToken(ctx, store.NewToken{Name: "b", Role: store.RoleIngest})
			if err != nil {
				t.Fatal(err)
			}
			h1, h2 := []byte("first body"), []byte("other body")
			claim := func(tok int64, key string, hash []byte, want store.IdempotencyOutcome) store.StoredAnswer {
				t.Helper()
				got, ans, err := s.ClaimIdempotencyKey(ctx, tok, key, hash)
				if err != nil || got != want {
					t.Fatalf("claim %s by %d: %s, %v; want %s", key, tok, got, err, want)
				}
				return ans
			}
			claim(a.ID, "k1", h1, store.IdempotencyNew)
			claim(a.ID, "k1", h1, store.IdempotencyInFlight)
			claim(a.ID, "k1", h2, store.IdempotencyMismatch)
			claim(b.ID, "k1", h2, store.IdempotencyNew) // keys are per token
			answer := store.StoredAnswer{Status: 200, ContentType: "application/json", Body: []byte(`{"inserted":3}`)}
			if err := s.SaveIdempotentAnswer(ctx, a.ID, "k1", answer); err != nil {
				t.Fatal(err)
			}
			if got := claim(a.ID, "k1", h1, store.IdempotencyReplay); got.Status != 200 || string(got.Body) != string(answer.Body) || got.ContentType != answer.ContentType {
				t.Errorf("replayed answer %+v", got)
			}
			claim(a.ID, "k1", h2, store.IdempotencyMismatch)
			if err := s.ReleaseIdempotencyKey(ctx, a.ID, "k1"); err != nil {
				t.Fatal(err)
			}
			claim(a.ID, "k1", h1, store.IdempotencyReplay) // a kept answer is not released

			claim(a.ID, "k2", h1, store.IdempotencyNew)
			if err := s.ReleaseIdempotencyKey(ctx, a.ID, "k2"); err != nil {
				t.Fatal(err)
			}
			claim(a.ID, "k2", h2, store.IdempotencyNew) // a failed request frees its key

			// A claim left in progress is taken over after a while.
			advance(11 * time.Minute)
			claim(a.ID, "k2", h1, store.IdempotencyNew)
			// After a day a key is free for any request, and purged.
			advance(store.IdempotencyTTL + time.Minute)
			claim(a.ID, "k1", h2, store.IdempotencyNew)
			if n, err := s.PurgeIdempotencyKeys(ctx); err != nil || n != 2 {
				t.Errorf("purge removed %d keys, %v; want token b's k1 and a's k2", n, err)
			}
			if _, _, err := s.ClaimIdempotencyKey(ctx, a.ID, "", h1); err == nil {
				t.Error("an empty key was claimed")
			}
		})
	}
}
