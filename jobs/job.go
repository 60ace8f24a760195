package jobs

import (
	"context"
	"errors"
	"fmt"
	"time"

	"kelvard/store"
)

// Job is one kind of work the scheduler runs: the assessment, the
// planning, the retention. Its Name is its key in job_runs, in the
// schedules and in the API path (lower-case letters, digits and dashes).
type Job interface {
	Name() string
	// Run does one run. tick is the scheduled time (or the request time for a manual run).
	// progress may be nil; it reports units done out of total.
	Run(ctx context.Context, tick time.Time, progress func(done, total int)) (Stats, error)
}

// Stats is what a run did, recorded on its job_runs row.
type Stats struct {
	// Drives and Readings count what the run processed.
	Drives, Readings int64
	// Note is a short plain-language summary ("312 drives, 4 new findings").
	Note string
}

// Names of the jobs kelvard schedules by default.
const (
	Assess    = "assess"
	Plan      = "plan"
	Retention = "retention"
)

// DefaultSchedules returns the cron expression (minute hour day-of-month
// month day-of-week, UTC) of each job that has a default: the assessment
// every quarter hour, planning nightly at 01:30, retention daily at 02:15.
// A job with no default and no configured schedule runs only on request.
func DefaultSchedules() map[string]string {
	return map[string]string{
		Assess:    "*/15 * * * *",
		Plan:      "30 1 * * *",
		Retention: "15 2 * * *",
	}
}

// Errors the scheduler returns, matched with errors.Is.
var (
	// ErrUnknownJob: no job of that name is registered.
	ErrUnknownJob = errors.New("unknown job")
	// ErrAlreadyRunning: a run of the job is going in this process or,
	// by its job_runs row, on another replica. It is store.ErrJobRunning,
	// so either name matches.
	ErrAlreadyRunning = store.ErrJobRunning
	// ErrStopped: the scheduler is shutting down and takes no new runs.
	ErrStopped = errors.New("scheduler stopped")
)

// validName reports whether a job name is usable as a key and a path
// segment.
func validName(name string) error {
	if name == "" {
		return errors.New("job name is empty")
	}
	if len(name) > 64 {
		return fmt.Errorf("job name %q is longer than 64 characters", name)
	}
	for _, r := range name {
		if !(r >= 'a' && r <= 'z' || r >= '0' && r <= '9' || r == '-') {
			return fmt.Errorf("job name %q: use lower-case letters, digits and dashes", name)
		}
	}
	return nil
}
