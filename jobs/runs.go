package jobs

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"runtime/debug"
	"strings"
	"sync"
	"time"

	"kelvard/store"
)

// RunNow starts a manual run of the named job in the background and
// returns its job_runs row (status running). The run's tick is the request
// time. It refuses with an error matching ErrAlreadyRunning while a run of
// the job is going in this process, or, by a job_runs row whose heartbeat
// is fresh, on any replica; with ErrUnknownJob for a name not registered;
// with ErrStopped once Stop has been called. The row's requested_by is the
// actor of ctx's store.Principal.
func (s *Scheduler) RunNow(ctx context.Context, name string) (store.JobRun, error) {
	e, a, run, err := s.startManual(ctx, name)
	if err != nil {
		return store.JobRun{}, err
	}
	go func() {
		defer s.release(name, a)
		_, _ = s.execute(s.base, e, run, a, nil) // execute records and logs the outcome
	}()
	return run, nil
}

// Run does a manual run of the named job in the caller's goroutine and
// returns its finished row and the job's error; `kelvard assess` uses it
// with a progress bar. It refuses as RunNow does. The run is cancelled
// when ctx is, or when Stop's deadline passes.
func (s *Scheduler) Run(ctx context.Context, name string, progress func(done, total int)) (store.JobRun, error) {
	e, a, run, err := s.startManual(ctx, name)
	if err != nil {
		return store.JobRun{}, err
	}
	defer s.release(name, a)
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	stop := context.AfterFunc(s.base, cancel)
	defer stop()
	return s.execute(ctx, e, run, a, progress)
}

// startManual reserves the job and claims a manual run of it.
func (s *Scheduler) startManual(ctx context.Context, name string) (*entry, *active, store.JobRun, error) {
	e := s.byName[name]
	if e == nil {
		return nil, nil, store.JobRun{}, fmt.Errorf("%w %q (registered: %s)", ErrUnknownJob, name, strings.Join(s.Names(), ", "))
	}
	a, busy, err := s.reserve(name, true)
	if err != nil {
		return nil, nil, store.JobRun{}, err
	}
	if a == nil {
		return nil, nil, store.JobRun{}, fmt.Errorf("%w: %s", ErrAlreadyRunning, busy)
	}
	now := s.now()
	s.claimMu.Lock()
	run, outcome, err := s.store.ClaimJobRun(ctx, store.JobClaim{Job: name, Tick: now, Manual: true,
		RequestedBy: store.PrincipalFrom(ctx).Actor, Runner: s.cfg.Runner, Now: now, StaleBefore: now.Add(-s.cfg.StaleAfter)})
	s.claimMu.Unlock()
	if err == nil && outcome != store.ClaimRun {
		// Another manual run was asked for in the same microsecond.
		err = fmt.Errorf("%w: run %d of %s was started at the same instant", ErrAlreadyRunning, run.ID, name)
	}
	if err != nil {
		s.release(name, a)
		return nil, nil, store.JobRun{}, fmt.Errorf("start %s: %w", name, err)
	}
	a.id.Store(run.ID)
	s.log.Info("manual job run started", slog.String("job", name), slog.Int64("run", run.ID), slog.String("by", run.RequestedBy))
	return e, a, run, nil
}

// execute runs a claimed run: it calls the job with a heartbeat going,
// turns a panic into a failure, and records the outcome on the row.
func (s *Scheduler) execute(ctx context.Context, e *entry, run store.JobRun, a *active, progress func(done, total int)) (store.JobRun, error) {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	var progressMu sync.Mutex
	report := func(done, total int) {
		a.done.Store(int64(done))
		a.total.Store(int64(total))
		if progress != nil {
			progressMu.Lock()
			progress(done, total)
			progressMu.Unlock()
		}
	}
	hbStop, hbDone := make(chan struct{}), make(chan struct{})
	go func() {
		defer close(hbDone)
		s.heartbeat(ctx, run.ID, a, hbStop)
	}()
	start := time.Now()
	stats, err := s.call(ctx, e, run.Tick, report)
	close(hbStop)
	<-hbDone

	fin := store.JobFinish{At: s.now(), Status: store.JobSucceeded, Drives: stats.Drives, Readings: stats.Readings,
		ProgressDone: a.done.Load(), ProgressTotal: a.total.Load(), Note: shorten(stats.Note, 500)}
	if err != nil {
		fin.Status = store.JobFailed
		fin.Error = errorText(err)
		if ctx.Err() != nil && errors.Is(err, ctx.Err()) {
			reason := "cancelled"
			if s.base.Err() != nil {
				reason = "cancelled: the server shut down during the run"
			}
			fin.Error = reason
		}
	}
	// Record the end even when the run's context is cancelled, and while
	// the database is away (recordEnd).
	final, ferr := s.recordEnd(ctx, e, a, run.ID, fin)
	log := s.log.With(slog.String("job", e.name), slog.Int64("run", run.ID), slog.Time("tick", run.Tick),
		slog.Bool("manual", run.Manual), slog.Duration("took", time.Since(start)), slog.Int64("drives", stats.Drives),
		slog.Int64("readings", stats.Readings))
	if ferr != nil {
		log.Error("record job run end", slog.String("status", string(fin.Status)), slog.Any("err", ferr), slog.Any("job_err", err))
		if err == nil {
			err = ferr
		}
		return run, err
	}
	if err != nil {
		log.Error("job run failed", slog.Any("err", err))
		return final, fmt.Errorf("%s run %d: %w", e.name, run.ID, err)
	}
	log.Info("job run succeeded", slog.String("note", fin.Note))
	return final, nil
}

// panicError is a job's panic turned into an error.
type panicError struct{ value any }

func (p *panicError) Error() string { return fmt.Sprintf("panic: %v", p.value) }

// call runs the job, recovering a panic into an error (logged with its
// stack) so the run is recorded as failed. cron.Recover stays outside as
// the net for the scheduler's own code.
func (s *Scheduler) call(ctx context.Context, e *entry, tick time.Time, progress func(done, total int)) (stats Stats, err error) {
	defer func() {
		if v := recover(); v != nil {
			s.log.Error("job panicked", slog.String("job", e.name), slog.Any("panic", v), slog.String("stack", string(debug.Stack())))
			stats, err = Stats{}, &panicError{value: v}
		}
	}()
	return e.job.Run(ctx, tick, progress)
}

// heartbeat writes the run's heartbeat and progress every Heartbeat until
// stop closes or ctx ends, so other replicas see the run alive.
func (s *Scheduler) heartbeat(ctx context.Context, id int64, a *active, stop <-chan struct{}) {
	t := time.NewTicker(s.cfg.Heartbeat)
	defer t.Stop()
	for {
		select {
		case <-stop:
			return
		case <-ctx.Done():
			return
		case <-t.C:
			if err := s.store.HeartbeatJobRun(ctx, id, s.now(), a.done.Load(), a.total.Load()); err != nil && ctx.Err() == nil {
				s.log.Warn("job heartbeat", slog.Int64("run", id), slog.Any("err", err))
			}
		}
	}
}
