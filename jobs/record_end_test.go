package jobs_test

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"sync/atomic"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestRunEndRecordedAfterOutage: a run that fails because the database
// went away cannot record its end at once either; the scheduler retries
// until the database is back, so the row does not stay running (which
// would refuse manual runs and skip scheduled ticks until its heartbeat
// went stale), and the next run starts at once.
func TestRunEndRecordedAfterOutage(t *testing.T) {
	t.Parallel()
	ctx := context.Background()
	st, proxy := storetest.OpenCut(t)
	var calls atomic.Int64
	restored := make(chan struct{})
	job := funcJob{name: "sweep", run: func(ctx context.Context, _ time.Time, _ func(int, int)) (jobs.Stats, error) {
		if calls.Add(1) > 1 {
			return jobs.Stats{Note: "swept"}, nil
		}
		// The database goes away in the middle of the run and comes
		// back a moment later.
		proxy.Cut()
		go func() {
			time.Sleep(800 * time.Millisecond)
			proxy.Restore()
			close(restored)
		}()
		return jobs.Stats{}, fmt.Errorf("sweep: %w", store.ErrUnavailable)
	}}
	logs := &logCounter{}
	s := newScheduler(t, jobs.Config{Store: st, Jobs: []jobs.Job{job}, Logger: slog.New(logs)})

	run, err := s.Run(ctx, "sweep", nil)
	if !errors.Is(err, store.ErrUnavailable) {
		t.Fatalf("run: %v, want the job's error", err)
	}
	<-restored
	got, err := st.JobRun(ctx, run.ID)
	if err != nil {
		t.Fatal(err)
	}
	if got.Status != store.JobFailed || got.FinishedAt == nil || got.Error != "the database is unavailable" {
		t.Fatalf("row after the outage: %+v, want failed with its end recorded", got)
	}
	if logs.count("retrying to record the job run's end") != 1 || logs.count("end recorded once the database answered") != 1 {
		t.Errorf("logs do not tell of the retries: %v", logs.msgs)
	}
	next, err := s.Run(ctx, "sweep", nil)
	if err != nil || next.Status != store.JobSucceeded || next.Note != "swept" {
		t.Fatalf("next run: %+v %v", next, err)
	}
}

// TestRunEndGivesUpWhenCancelled: when the caller cancels a run (Ctrl-C on
// `kelvard assess`) while the database is away, recording its end makes
// one last attempt and returns, rather than retrying until the row would
// turn stale (10 minutes by default).
func TestRunEndGivesUpWhenCancelled(t *testing.T) {
	t.Parallel()
	st, proxy := storetest.OpenCut(t)
	t.Cleanup(proxy.Restore)
	ctx, cancel := context.WithCancel(context.Background())
	job := funcJob{name: "sweep", run: func(context.Context, time.Time, func(int, int)) (jobs.Stats, error) {
		proxy.Cut()
		cancel()
		return jobs.Stats{}, fmt.Errorf("sweep: %w", store.ErrUnavailable)
	}}
	s := newScheduler(t, jobs.Config{Store: st, Jobs: []jobs.Job{job}})
	done := make(chan error, 1)
	go func() {
		_, err := s.Run(ctx, "sweep", nil)
		done <- err
	}()
	select {
	case err := <-done:
		if err == nil {
			t.Fatal("run succeeded with the database away")
		}
	case <-time.After(2 * time.Minute):
		t.Fatal("the cancelled run was still retrying to record its end after 2 minutes")
	}
}
