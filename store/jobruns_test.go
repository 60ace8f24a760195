package store_test

import (
	"context"
	"errors"
	"sync"
	"testing"
	"time"

	"kelvard/store"
)

var t0 = time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC)

func claim(job string, tick time.Time, manual bool, runner string, now time.Time) store.JobClaim {
	return store.JobClaim{Job: job, Tick: tick, Manual: manual, Runner: runner, Now: now, StaleBefore: now.Add(-10 * time.Minute)}
}

func TestJobRunClaimOutcomes(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		run, out, err := s.ClaimJobRun(ctx, claim("assess", t0, false, "a", t0.Add(time.Second)))
		if err != nil || out != store.ClaimRun {
			t.Fatalf("first claim: %v %v", out, err)
		}
		if run.Status != store.JobRunning || !run.Tick.Equal(t0) || run.Runner != "a" || run.FinishedAt != nil {
			t.Errorf("claimed row %+v", run)
		}
		// A late replica with the same tick finds the row.
		again, out, err := s.ClaimJobRun(ctx, claim("assess", t0, false, "b", t0.Add(4*time.Second)))
		if err != nil || out != store.ClaimTaken || again.ID != run.ID {
			t.Fatalf("second claim of the tick: %v %v %+v", out, err, again)
		}
		// The next tick while the first still runs is recorded as skipped.
		next := t0.Add(5 * time.Minute)
		skipped, out, err := s.ClaimJobRun(ctx, claim("assess", next, false, "b", next))
		if err != nil || out != store.ClaimBusy {
			t.Fatalf("claim while running: %v %v", out, err)
		}
		if skipped.Status != store.JobSkipped || skipped.FinishedAt == nil || skipped.Note == "" {
			t.Errorf("skipped row %+v", skipped)
		}
		// A manual claim is refused while it runs and writes nothing.
		busy, _, err := s.ClaimJobRun(ctx, claim("assess", next.Add(time.Second), true, "b", next.Add(time.Second)))
		if !errors.Is(err, store.ErrJobRunning) || busy.ID != run.ID {
			t.Fatalf("manual claim while running: %v, busy run %d", err, busy.ID)
		}
		// Another job is independent.
		if _, out, err := s.ClaimJobRun(ctx, claim("plan", t0, false, "a", t0)); err != nil || out != store.ClaimRun {
			t.Fatalf("claim of another job at the same tick: %v %v", out, err)
		}
		if err := s.HeartbeatJobRun(ctx, run.ID, t0.Add(time.Minute), 3, 10); err != nil {
			t.Fatal(err)
		}
		fin, err := s.FinishJobRun(ctx, run.ID, store.JobFinish{At: t0.Add(90 * time.Second), Status: store.JobSucceeded,
			Drives: 12, Readings: 3400, ProgressDone: 12, ProgressTotal: 12, Note: "12 drives"})
		if err != nil {
			t.Fatal(err)
		}
		if d, ok := fin.Duration(); !ok || d != 89*time.Second || fin.Drives != 12 || fin.Readings != 3400 || fin.Status != store.JobSucceeded {
			t.Errorf("finished row %+v (duration %v)", fin, d)
		}
		if _, err := s.FinishJobRun(ctx, run.ID, store.JobFinish{At: t0, Status: store.JobRunning}); err == nil {
			t.Error("finishing a run as running was accepted")
		}
		// Now a manual run goes ahead.
		manual, out, err := s.ClaimJobRun(ctx, claim("assess", next.Add(2*time.Second), true, "b", next.Add(2*time.Second)))
		if err != nil || out != store.ClaimRun || !manual.Manual {
			t.Fatalf("manual claim after the run finished: %v %v %+v", out, err, manual)
		}
		var n int64
		s.DB(ctx).Model(&store.JobRun{}).Count(&n)
		if n != 4 {
			t.Errorf("%d rows, want 4 (assess run, skipped tick, plan run, manual run)", n)
		}
	})
}

func TestJobRunStaleRunIsAbandoned(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		dead, _, err := s.ClaimJobRun(ctx, claim("assess", t0, false, "crashed", t0))
		if err != nil {
			t.Fatal(err)
		}
		// Five minutes on the run still counts as alive: the tick is skipped.
		tick := t0.Add(5 * time.Minute)
		if _, out, err := s.ClaimJobRun(ctx, claim("assess", tick, false, "b", tick)); err != nil || out != store.ClaimBusy {
			t.Fatalf("claim with a live running row: %v %v", out, err)
		}
		// Past the staleness limit the dead run is failed and the tick runs.
		tick = t0.Add(15 * time.Minute)
		run, out, err := s.ClaimJobRun(ctx, claim("assess", tick, false, "b", tick))
		if err != nil || out != store.ClaimRun {
			t.Fatalf("claim after the running row went stale: %v %v", out, err)
		}
		got, err := s.JobRun(ctx, dead.ID)
		if err != nil {
			t.Fatal(err)
		}
		if got.Status != store.JobFailed || got.FinishedAt == nil || !got.FinishedAt.Equal(tick) || got.Error == "" {
			t.Errorf("stale run after the claim: %+v", got)
		}
		if run.Status != store.JobRunning {
			t.Errorf("new run %+v", run)
		}
		// A heartbeat keeps a long run alive past the staleness limit.
		if err := s.HeartbeatJobRun(ctx, run.ID, tick.Add(20*time.Minute), 1, 2); err != nil {
			t.Fatal(err)
		}
		later := tick.Add(25 * time.Minute)
		if n, err := s.AbandonStaleJobRuns(ctx, "assess", later.Add(-10*time.Minute), later); err != nil || n != 0 {
			t.Fatalf("abandon with a fresh heartbeat: %d %v", n, err)
		}
		if n, err := s.AbandonStaleJobRuns(ctx, "assess", later.Add(time.Minute), later); err != nil || n != 1 {
			t.Fatalf("abandon with an old heartbeat: %d %v", n, err)
		}
	})
}

// TestJobRunConcurrentClaims has many goroutines claim one tick at once:
// exactly one may run it.
func TestJobRunConcurrentClaims(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		const n = 8
		var (
			wg       sync.WaitGroup
			mu       sync.Mutex
			outcomes = map[store.ClaimOutcome]int{}
		)
		for i := range n {
			wg.Add(1)
			go func() {
				defer wg.Done()
				now := t0.Add(time.Duration(i) * time.Millisecond)
				_, out, err := s.ClaimJobRun(ctx, claim("assess", t0, false, "r", now))
				if err != nil {
					t.Error(err)
					return
				}
				mu.Lock()
				outcomes[out]++
				mu.Unlock()
			}()
		}
		wg.Wait()
		if outcomes[store.ClaimRun] != 1 || outcomes[store.ClaimTaken] != n-1 {
			t.Errorf("outcomes %v, want one run and %d taken", outcomes, n-1)
		}
	})
}

func TestJobRunSkipRecordAndList(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		row, made, err := s.RecordSkippedJobRun(ctx, "plan", t0, "a", "still running here", t0)
		if err != nil || !made || row.Status != store.JobSkipped {
			t.Fatalf("record skip: %v %v %+v", made, err, row)
		}
		if _, made, err := s.RecordSkippedJobRun(ctx, "plan", t0, "b", "again", t0); err != nil || made {
			t.Fatalf("second skip of the same tick: %v %v", made, err)
		}
		for i := 1; i <= 5; i++ {
			tick := t0.Add(time.Duration(i) * time.Hour)
			r, _, err := s.ClaimJobRun(ctx, claim("assess", tick, false, "a", tick))
			if err != nil {
				t.Fatal(err)
			}
			status := store.JobSucceeded
			if i == 3 {
				status = store.JobFailed
			}
			if _, err := s.FinishJobRun(ctx, r.ID, store.JobFinish{At: tick.Add(time.Duration(i) * time.Second), Status: status}); err != nil {
				t.Fatal(err)
			}
		}
		page, err := s.JobRuns(ctx, store.JobRunQuery{Job: "assess", Limit: 2})
		if err != nil {
			t.Fatal(err)
		}
		if len(page.Items) != 2 || page.Next == "" || !page.Items[0].Tick.Equal(t0.Add(5*time.Hour)) {
			t.Fatalf("first page %+v", page)
		}
		var all []store.JobRun
		for q := (store.JobRunQuery{Job: "assess", Limit: 2}); ; {
			p, err := s.JobRuns(ctx, q)
			if err != nil {
				t.Fatal(err)
			}
			all = append(all, p.Items...)
			if p.Next == "" {
				break
			}
			q.Cursor = p.Next
		}
		if len(all) != 5 {
			t.Errorf("paged through %d assess runs, want 5", len(all))
		}
		failed, err := s.JobRuns(ctx, store.JobRunQuery{Status: store.JobFailed})
		if err != nil || len(failed.Items) != 1 || !failed.Items[0].Tick.Equal(t0.Add(3*time.Hour)) {
			t.Errorf("failed filter: %v %+v", err, failed)
		}
		var ve *store.ValidationError
		if _, err := s.JobRuns(ctx, store.JobRunQuery{Status: "paused"}); !errors.As(err, &ve) || ve.Fields[0].Field != "status" {
			t.Errorf("unknown status filter: %v", err)
		}

		stats, err := s.JobRunStats(ctx)
		if err != nil {
			t.Fatal(err)
		}
		if len(stats) != 2 || stats[0].Job != "assess" || stats[1].Job != "plan" {
			t.Fatalf("stats %+v", stats)
		}
		// The last finished assess run is the fifth (5 s long); the last
		// success is also the fifth.
		if d, ok := stats[0].LastDuration(); !ok || d != 5*time.Second {
			t.Errorf("assess last duration %v %v, want 5s", d, ok)
		}
		if stats[0].LastSuccessAt == nil || !stats[0].LastSuccessAt.Equal(t0.Add(5*time.Hour+5*time.Second)) {
			t.Errorf("assess last success %v", stats[0].LastSuccessAt)
		}
		// A skipped tick is not a run: plan has neither.
		if stats[1].LastFinished != nil || stats[1].LastSuccessAt != nil {
			t.Errorf("plan stats from a skipped tick: %+v", stats[1])
		}
		named, err := s.JobRunStats(ctx, "retention", "assess")
		if err != nil || len(named) != 2 || named[0].Job != "retention" || named[0].LastFinished != nil || named[1].LastFinished == nil {
			t.Errorf("named stats %v %+v", err, named)
		}

		n, err := s.PruneJobRuns(ctx, t0.Add(3*time.Hour))
		if err != nil || n != 3 {
			t.Errorf("prune deleted %d (%v), want the skipped plan tick and two assess runs", n, err)
		}
	})
}
