package jobs

import (
	"fmt"
	"log/slog"
	"time"

	"kelvard/store"
)

// scheduledBy is requested_by on the rows of scheduled runs.
const scheduledBy = "schedule"

// takeTick returns the tick a firing of e belongs to: the scheduled time
// cron fired it for, or, should that be missing or in the future (the
// clock stepped back), the latest scheduled time at or before now. Each
// firing takes one time from the queue, whether it runs or is skipped.
func (s *Scheduler) takeTick(e *entry, now time.Time) time.Time {
	if t, ok := e.due.pop(); ok && !t.After(now.Add(tickGrace)) {
		return t
	}
	return lastTick(e.sched, now.Add(tickGrace))
}

// fire is what cron calls when e's schedule comes due: claim the tick,
// and run the job if this process won it.
func (s *Scheduler) fire(e *entry) {
	now := s.now()
	tick := s.takeTick(e, now)
	if tick.IsZero() {
		s.log.Warn("job fired with no scheduled time behind it", slog.String("job", e.name), slog.Time("now", now))
		return
	}
	a, busy, err := s.reserve(e.name, false)
	if err != nil {
		return // stopping
	}
	if a == nil {
		s.recordSkip(e, tick, now, "skipped: "+busy)
		return
	}
	defer s.release(e.name, a)
	s.claimMu.Lock()
	run, outcome, err := s.store.ClaimJobRun(s.base, store.JobClaim{Job: e.name, Tick: tick, RequestedBy: scheduledBy,
		Runner: s.cfg.Runner, Now: now, StaleBefore: now.Add(-s.cfg.StaleAfter)})
	s.claimMu.Unlock()
	log := s.log.With(slog.String("job", e.name), slog.Time("tick", tick))
	switch {
	case err != nil:
		log.Error("claim job tick", slog.Any("err", err))
	case outcome == store.ClaimTaken:
		log.Debug("tick already claimed", slog.Int64("run", run.ID), slog.String("by", run.Runner))
	case outcome == store.ClaimBusy:
		log.Info("tick skipped", slog.Int64("run", run.ID), slog.String("note", run.Note))
	case outcome == store.ClaimRun:
		a.id.Store(run.ID)
		_, _ = s.execute(s.base, e, run, a, nil) // execute records and logs the outcome
	}
}

// skipTick records the tick of a firing of e that cron's
// SkipIfStillRunning skipped.
func (s *Scheduler) skipTick(e *entry, note string) {
	now := s.now()
	if tick := s.takeTick(e, now); !tick.IsZero() {
		s.recordSkip(e, tick, now, note)
	}
}

// recordSkip records a tick of e as skipped with the note, unless the tick
// already has a row.
func (s *Scheduler) recordSkip(e *entry, tick, now time.Time, note string) {
	s.mu.Lock()
	stopped := s.stopped
	s.mu.Unlock()
	if stopped {
		return
	}
	run, made, err := s.store.RecordSkippedJobRun(s.base, e.name, tick, s.cfg.Runner, note, now)
	log := s.log.With(slog.String("job", e.name), slog.Time("tick", tick))
	switch {
	case err != nil:
		log.Error("record skipped tick", slog.Any("err", err))
	case made:
		log.Info("tick skipped", slog.Int64("run", run.ID), slog.String("note", note))
	default:
		log.Debug("tick already recorded")
	}
}

// reserve marks the job as running in this process. It returns the
// reservation, or nil and a description of the run already going here, or
// ErrStopped once Stop has been called.
func (s *Scheduler) reserve(name string, manual bool) (*active, string, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.stopped {
		return nil, "", ErrStopped
	}
	if a, ok := s.running[name]; ok {
		kind := "scheduled"
		if a.manual {
			kind = "manual"
		}
		desc := fmt.Sprintf("a %s run of %s is still running here since %s", kind, name, a.since.Format(time.RFC3339))
		if id := a.id.Load(); id != 0 {
			desc = fmt.Sprintf("%s run %d of %s is still running here since %s", kind, id, name, a.since.Format(time.RFC3339))
		}
		return nil, desc, nil
	}
	a := &active{manual: manual, since: s.now()}
	s.running[name] = a
	s.wg.Add(1)
	return a, "", nil
}

// release ends a reservation made by reserve (execute may already have
// taken it out of running, as it records the end).
func (s *Scheduler) release(name string, a *active) {
	s.mu.Lock()
	if s.running[name] == a {
		delete(s.running, name)
	}
	s.mu.Unlock()
	s.wg.Done()
}
