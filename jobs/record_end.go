package jobs

import (
	"context"
	"errors"
	"log/slog"
	"time"

	"kelvard/store"
)

// Bounds of the retries that record a run's end while the database is
// away: the first wait and the longest.
const (
	endRetryFirst = 250 * time.Millisecond
	endRetryMax   = 5 * time.Second
)

// recordEnd writes a run's end on its row and takes the job out of this
// process's running set in the same step, so whoever sees the row finished
// may start the next run at once. A run often fails because the database
// went away, and then its end cannot be written either: left running, the
// row would refuse manual runs and skip every scheduled tick until its
// heartbeat turned stale (10 minutes by default). So while the database is
// unavailable the write is retried, with backoff, until it succeeds, the
// staleness limit passes (by then other replicas take the run for
// abandoned), or ctx is cancelled (Ctrl-C on `kelvard assess`, or Stop's
// deadline, which every run's context follows), after one last attempt.
// Each attempt runs even when ctx is cancelled. The caller's release takes
// the job out of the running set when the end could not be written.
func (s *Scheduler) recordEnd(ctx context.Context, e *entry, a *active, id int64, fin store.JobFinish) (store.JobRun, error) {
	giveUp := time.Now().Add(s.cfg.StaleAfter)
	wait := endRetryFirst
	for attempt := 1; ; attempt++ {
		final, err := s.tryRecordEnd(ctx, e, a, id, fin)
		if err == nil {
			if attempt > 1 {
				s.log.Info("job run end recorded once the database answered", slog.String("job", e.name), slog.Int64("run", id), slog.Int("attempts", attempt))
			}
			return final, nil
		}
		if !errors.Is(err, store.ErrUnavailable) || time.Now().Add(wait).After(giveUp) {
			return final, err
		}
		if attempt == 1 {
			s.log.Warn("database unavailable: retrying to record the job run's end", slog.String("job", e.name), slog.Int64("run", id), slog.Any("err", err))
		}
		select {
		case <-time.After(wait):
		case <-ctx.Done():
			return s.tryRecordEnd(ctx, e, a, id, fin)
		}
		wait = min(2*wait, endRetryMax)
	}
}

// tryRecordEnd makes one attempt; on success the job stops counting as
// running here.
func (s *Scheduler) tryRecordEnd(ctx context.Context, e *entry, a *active, id int64, fin store.JobFinish) (store.JobRun, error) {
	fctx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 10*time.Second)
	defer cancel()
	s.mu.Lock()
	defer s.mu.Unlock()
	final, err := s.store.FinishJobRun(fctx, id, fin)
	if err == nil && s.running[e.name] == a {
		delete(s.running, e.name)
	}
	return final, err
}
