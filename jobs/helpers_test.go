package jobs_test

import (
	"context"
	"log/slog"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// forEachStore runs f against PostgreSQL and SQLite, each on a fresh
// database, in parallel.
func forEachStore(t *testing.T, f func(t *testing.T, d store.Dialect)) {
	t.Helper()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			f(t, d)
		})
	}
}

// openShared opens n stores on one fresh, migrated database, as n replicas
// would.
func openShared(t *testing.T, d store.Dialect, n int) []*store.Store {
	t.Helper()
	url := storetest.URL(t, d)
	ctx := context.Background()
	out := make([]*store.Store, n)
	for i := range out {
		s, err := store.Open(ctx, url, store.Options{})
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(func() { s.Close() })
		if i == 0 {
			if _, err := s.Migrate(ctx); err != nil {
				t.Fatal(err)
			}
		}
		out[i] = s
	}
	return out
}

// funcJob is a Job made of a function.
type funcJob struct {
	name string
	run  func(ctx context.Context, tick time.Time, progress func(done, total int)) (jobs.Stats, error)
}

func (j funcJob) Name() string { return j.name }

func (j funcJob) Run(ctx context.Context, tick time.Time, progress func(done, total int)) (jobs.Stats, error) {
	return j.run(ctx, tick, progress)
}

// tally counts a job's invocations per tick and its peak concurrency.
type tally struct {
	mu      sync.Mutex
	perTick map[time.Time]int
	by      map[time.Time]string
	calls   atomic.Int64
	now     atomic.Int64
	peak    atomic.Int64
}

func newTally() *tally {
	return &tally{perTick: map[time.Time]int{}, by: map[time.Time]string{}}
}

// job returns a job named name that records its calls under runner and
// then does work.
func (ty *tally) job(name, runner string, work func(ctx context.Context, call int64) error) jobs.Job {
	return funcJob{name: name, run: func(ctx context.Context, tick time.Time, progress func(int, int)) (jobs.Stats, error) {
		n := ty.now.Add(1)
		defer ty.now.Add(-1)
		for {
			p := ty.peak.Load()
			if n <= p || ty.peak.CompareAndSwap(p, n) {
				break
			}
		}
		call := ty.calls.Add(1)
		ty.mu.Lock()
		ty.perTick[tick]++
		ty.by[tick] = runner
		ty.mu.Unlock()
		if progress != nil {
			progress(1, 2)
		}
		if work != nil {
			if err := work(ctx, call); err != nil {
				return jobs.Stats{}, err
			}
		}
		return jobs.Stats{Drives: 2, Readings: 10, Note: "counted"}, nil
	}}
}

// allRuns reads every job_runs row, oldest first.
func allRuns(t *testing.T, s *store.Store) []store.JobRun {
	t.Helper()
	var out []store.JobRun
	if err := s.DB(context.Background()).Order("tick, id").Find(&out).Error; err != nil {
		t.Fatal(err)
	}
	return out
}

// waitFor polls cond until it holds or the timeout passes.
func waitFor(t *testing.T, timeout time.Duration, what string, cond func() bool) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		if time.Now().After(deadline) {
			t.Fatalf("timed out after %v waiting for %s", timeout, what)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// logCounter is a slog handler that counts messages containing a text.
type logCounter struct {
	mu   sync.Mutex
	msgs []string
}

func (l *logCounter) Enabled(context.Context, slog.Level) bool { return true }
func (l *logCounter) Handle(_ context.Context, r slog.Record) error {
	l.mu.Lock()
	l.msgs = append(l.msgs, r.Message)
	l.mu.Unlock()
	return nil
}
func (l *logCounter) WithAttrs([]slog.Attr) slog.Handler { return l }
func (l *logCounter) WithGroup(string) slog.Handler      { return l }

func (l *logCounter) count(text string) int {
	l.mu.Lock()
	defer l.mu.Unlock()
	n := 0
	for _, m := range l.msgs {
		if strings.Contains(m, text) {
			n++
		}
	}
	return n
}

// newScheduler builds a scheduler and stops it when the test ends.
func newScheduler(t *testing.T, cfg jobs.Config) *jobs.Scheduler {
	t.Helper()
	s, err := jobs.New(cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
		defer cancel()
		if err := s.Stop(ctx); err != nil {
			t.Errorf("stop: %v", err)
		}
	})
	return s
}
