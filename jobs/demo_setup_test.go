package jobs_test

import (
	"context"
	"log/slog"
	"slices"
	"sync"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestStartDemoPlansAfterAssessing: the demo set-up runs the assessment and
// then the planning pass through the scheduler (each recorded as a run),
// and stays unready until the planning pass is done. The store already
// holds a register, so nothing is loaded and the runs are quick.
func TestStartDemoPlansAfterAssessing(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		st := storetest.Open(t, d)
		storetest.Build(t, st, "a")
		ctx := context.Background()
		var mu sync.Mutex
		var order []string
		release := make(chan struct{})
		record := func(name string) jobs.Job {
			return funcJob{name: name, run: func(ctx context.Context, _ time.Time, _ func(int, int)) (jobs.Stats, error) {
				mu.Lock()
				order = append(order, name)
				mu.Unlock()
				if name == jobs.Plan {
					// Still planning: not ready yet.
					<-release
				}
				return jobs.Stats{Note: name + " done"}, nil
			}}
		}
		sched, err := jobs.New(jobs.Config{Store: st, Jobs: []jobs.Job{record(jobs.Assess), record(jobs.Plan)}})
		if err != nil {
			t.Fatal(err)
		}
		setup := jobs.StartDemo(ctx, st, sched, time.Now(), slog.New(slog.DiscardHandler))
		deadline := time.Now().Add(30 * time.Second)
		for {
			mu.Lock()
			planning := slices.Contains(order, jobs.Plan)
			mu.Unlock()
			if planning {
				break
			}
			if time.Now().After(deadline) {
				t.Fatalf("the planning pass never started; runs so far %v", order)
			}
			time.Sleep(10 * time.Millisecond)
		}
		if err := setup.Ready(ctx); err == nil || err.Error() != "running the first planning pass" {
			t.Errorf("while planning, Ready = %v", err)
		}
		close(release)
		if err := setup.Wait(ctx); err != nil {
			t.Fatal(err)
		}
		if err := setup.Ready(ctx); err != nil {
			t.Errorf("after planning, Ready = %v", err)
		}
		if !slices.Equal(order, []string{jobs.Assess, jobs.Plan}) {
			t.Errorf("runs %v, want assess then plan", order)
		}
		runs, err := st.JobRuns(ctx, store.JobRunQuery{Limit: 10})
		if err != nil {
			t.Fatal(err)
		}
		var recorded []string
		for _, r := range runs.Items {
			if r.Status == store.JobSucceeded && r.Manual {
				recorded = append(recorded, r.Job)
			}
		}
		slices.Sort(recorded)
		if !slices.Equal(recorded, []string{jobs.Assess, jobs.Plan}) {
			t.Errorf("recorded runs %v, want one assess and one plan", recorded)
		}
	})
}
