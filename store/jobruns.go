package store

import (
	"context"
	"errors"
	"fmt"
	"hash/fnv"
	"slices"
	"time"

	"gorm.io/gorm"
	"gorm.io/gorm/clause"
)

// JobStatus is the state of one job run.
type JobStatus string

// Job run states. A run starts as running and ends succeeded or failed; a
// scheduled tick that found another run of the job still going is recorded
// as skipped and never runs.
const (
	JobRunning   JobStatus = "running"
	JobSucceeded JobStatus = "succeeded"
	JobFailed    JobStatus = "failed"
	JobSkipped   JobStatus = "skipped"
)

// JobStatuses lists every job run state.
func JobStatuses() []JobStatus {
	return []JobStatus{JobRunning, JobSucceeded, JobFailed, JobSkipped}
}

// ErrJobRunning means a run of the job is already going (in this process
// or, by its row in job_runs, on another replica), so another is refused.
var ErrJobRunning = errors.New("job already running")

// JobRun is one run of a job, scheduled or manual. Tick is the scheduled
// time the run belongs to (for a manual run, the time it was asked for);
// (job, tick) is unique, which is how replicas claim a tick once.
type JobRun struct {
	ID          int64      `json:"id" gorm:"primaryKey"`
	Job         string     `json:"job"`
	Tick        time.Time  `json:"tick"`
	Manual      bool       `json:"manual"`
	RequestedBy string     `json:"requested_by"`
	Runner      string     `json:"runner"`
	Status      JobStatus  `json:"status"`
	StartedAt   time.Time  `json:"started_at"`
	HeartbeatAt time.Time  `json:"heartbeat_at"`
	FinishedAt  *time.Time `json:"finished_at"`
	// Drives and Readings count what the run processed.
	Drives   int64 `json:"drives"`
	Readings int64 `json:"readings"`
	// ProgressDone and ProgressTotal are the last progress the job
	// reported, written with each heartbeat.
	ProgressDone  int64  `json:"progress_done"`
	ProgressTotal int64  `json:"progress_total"`
	Note          string `json:"note"`
	// Error is a short, plain explanation of a failure: never SQL or
	// secrets.
	Error string `json:"error"`
}

// TableName names the job run table.
func (JobRun) TableName() string { return "job_runs" }

// Duration is how long a finished run took; ok is false while it runs.
func (r JobRun) Duration() (d time.Duration, ok bool) {
	if r.FinishedAt == nil {
		return 0, false
	}
	return r.FinishedAt.Sub(r.StartedAt), true
}

// JobClaim asks to claim one tick of a job.
type JobClaim struct {
	Job  string
	Tick time.Time
	// Manual marks a run asked for by a person or a command rather than
	// the schedule. A manual claim is refused with ErrJobRunning while
	// another run of the job is going; a scheduled one is recorded as
	// skipped instead.
	Manual      bool
	RequestedBy string
	// Runner names the process that claims (host and process id).
	Runner string
	// Now is the claimer's clock reading, written as started_at.
	Now time.Time
	// StaleBefore: a running row of the job whose heartbeat is older is
	// taken to be abandoned by a stopped runner and marked failed first.
	StaleBefore time.Time
}

// ClaimOutcome says what a claim did.
type ClaimOutcome int

// Claim outcomes.
const (
	// ClaimRun: the row was inserted as running; the caller runs the job.
	ClaimRun ClaimOutcome = iota + 1
	// ClaimTaken: a row for (job, tick) already exists (another replica
	// claimed the tick first); nothing was written.
	ClaimTaken
	// ClaimBusy: another run of the job is still running; a skipped row
	// was recorded for the tick.
	ClaimBusy
)

func (o ClaimOutcome) String() string {
	switch o {
	case ClaimRun:
		return "run"
	case ClaimTaken:
		return "taken"
	case ClaimBusy:
		return "busy"
	}
	return fmt.Sprintf("ClaimOutcome(%d)", int(o))
}

// abandonedText is the error written on a running row whose runner stopped
// sending heartbeats.
const abandonedText = "abandoned: no heartbeat within the staleness limit; its runner stopped or lost the database"

// ClaimJobRun claims a tick of a job in one transaction. On PostgreSQL the
// transaction first takes an advisory lock keyed to the job (and schema),
// so replicas claiming the same job queue one behind the other: a replica
// whose clock fires late finds the row of the tick and does not run it
// again. On SQLite the immediate transaction serialises writers and the
// unique key does the rest.
//
// Inside the transaction it marks the job's stale running rows failed,
// then returns ClaimTaken with the existing row if the tick is already
// recorded; if another run of the job is still running it records the tick
// as skipped (ClaimBusy) or, for a manual claim, returns that running row
// with an error matching ErrJobRunning; otherwise it inserts the tick as
// running (ClaimRun).
func (s *Store) ClaimJobRun(ctx context.Context, c JobClaim) (JobRun, ClaimOutcome, error) {
	if c.Job == "" {
		return JobRun{}, 0, Invalid("job", "is required")
	}
	now, tick := utc(c.Now), utc(c.Tick)
	var (
		run     JobRun
		outcome ClaimOutcome
		busyErr error
	)
	err := s.tx(ctx, func(tx *gorm.DB) error {
		run, outcome, busyErr = JobRun{}, 0, nil
		if err := s.lockJob(tx, c.Job); err != nil {
			return err
		}
		if _, err := abandonStale(tx, c.Job, utc(c.StaleBefore), now); err != nil {
			return err
		}
		var existing JobRun
		if err := tx.Where("job = ? AND tick = ?", c.Job, tick).Limit(1).Find(&existing).Error; err != nil {
			return fmt.Errorf("read job run %s at %s: %w", c.Job, tick.Format(time.RFC3339), translate(err))
		}
		if existing.ID != 0 {
			run, outcome = existing, ClaimTaken
			return nil
		}
		var busy JobRun
		if err := tx.Where("job = ? AND status = ?", c.Job, JobRunning).Order("id").Limit(1).Find(&busy).Error; err != nil {
			return fmt.Errorf("read running %s runs: %w", c.Job, translate(err))
		}
		row := JobRun{Job: c.Job, Tick: tick, Manual: c.Manual, RequestedBy: c.RequestedBy, Runner: c.Runner,
			Status: JobRunning, StartedAt: now, HeartbeatAt: now}
		outcome = ClaimRun
		if busy.ID != 0 {
			if c.Manual {
				run = busy
				busyErr = fmt.Errorf("%w: %s", ErrJobRunning, describeRunning(busy))
				return nil
			}
			row.Status, row.FinishedAt = JobSkipped, &now
			row.Note = "skipped: " + describeRunning(busy)
			outcome = ClaimBusy
		}
		if err := tx.Create(&row).Error; err != nil {
			return fmt.Errorf("record job run %s at %s: %w", c.Job, tick.Format(time.RFC3339), translate(err))
		}
		run = row
		return nil
	})
	if errors.Is(err, ErrDuplicate) {
		// Only reachable on a store without the advisory lock when two
		// claims race past the read: the other one won the tick.
		var existing JobRun
		if rerr := s.db.WithContext(ctx).Where("job = ? AND tick = ?", c.Job, tick).Take(&existing).Error; rerr != nil {
			return JobRun{}, 0, fmt.Errorf("read job run %s at %s: %w", c.Job, tick.Format(time.RFC3339), translate(rerr))
		}
		return existing, ClaimTaken, nil
	}
	if err != nil {
		return JobRun{}, 0, err
	}
	if busyErr != nil {
		return run, 0, busyErr
	}
	return run, outcome, nil
}

// describeRunning names a running run for notes and errors.
func describeRunning(r JobRun) string {
	kind := "scheduled"
	if r.Manual {
		kind = "manual"
	}
	return fmt.Sprintf("%s run %d of %s (tick %s) is still running on %s since %s",
		kind, r.ID, r.Job, r.Tick.UTC().Format(time.RFC3339), orUnknown(r.Runner), r.StartedAt.UTC().Format(time.RFC3339))
}

func orUnknown(s string) string {
	if s == "" {
		return "an unnamed runner"
	}
	return s
}

// lockJob takes the transaction-scoped advisory lock of a job on
// PostgreSQL; it does nothing on SQLite, whose immediate transactions
// already serialise writers.
func (s *Store) lockJob(tx *gorm.DB, job string) error {
	if s.dialect != Postgres {
		return nil
	}
	var schema string
	if err := tx.Raw("SELECT current_schema()").Scan(&schema).Error; err != nil {
		return fmt.Errorf("read current schema: %w", translate(err))
	}
	if err := tx.Exec("SELECT pg_advisory_xact_lock(?)", jobLockKey(schema, job)).Error; err != nil {
		return fmt.Errorf("lock job %s: %w", job, translate(err))
	}
	return nil
}

// jobLockKey derives the advisory lock key of a job from its name and the
// schema, so separate kelvard schemas in one database do not contend.
func jobLockKey(schema, job string) int64 {
	h := fnv.New64a()
	h.Write([]byte("kelvard job " + schema + " " + job))
	return int64(h.Sum64() >> 1)
}

// abandonStale marks the job's running rows whose heartbeat is older than
// staleBefore as failed.
func abandonStale(tx *gorm.DB, job string, staleBefore, now time.Time) (int64, error) {
	if staleBefore.IsZero() {
		return 0, nil
	}
	res := tx.Model(&JobRun{}).Where("job = ? AND status = ? AND heartbeat_at < ?", job, JobRunning, staleBefore).
		Updates(map[string]any{"status": JobFailed, "finished_at": now, "error": abandonedText})
	if res.Error != nil {
		return 0, fmt.Errorf("fail abandoned %s runs: %w", job, translate(res.Error))
	}
	return res.RowsAffected, nil
}

// AbandonStaleJobRuns marks every running row of the job whose heartbeat
// is older than staleBefore as failed, and reports how many it marked.
func (s *Store) AbandonStaleJobRuns(ctx context.Context, job string, staleBefore, now time.Time) (int64, error) {
	var n int64
	err := s.tx(ctx, func(tx *gorm.DB) error {
		if err := s.lockJob(tx, job); err != nil {
			return err
		}
		var err error
		n, err = abandonStale(tx, job, utc(staleBefore), utc(now))
		return err
	})
	return n, err
}

// RecordSkippedJobRun records a tick of the job as skipped with the note,
// unless the tick already has a row (then it reports false and writes
// nothing). The scheduler calls it when it skips a tick because the job is
// still running in its own process.
func (s *Store) RecordSkippedJobRun(ctx context.Context, job string, tick time.Time, runner, note string, now time.Time) (JobRun, bool, error) {
	at := utc(now)
	row := JobRun{Job: job, Tick: utc(tick), Runner: runner, Status: JobSkipped, StartedAt: at, HeartbeatAt: at, FinishedAt: &at, Note: note}
	res := s.db.WithContext(ctx).Clauses(clause.OnConflict{Columns: []clause.Column{{Name: "job"}, {Name: "tick"}}, DoNothing: true}).Create(&row)
	if res.Error != nil {
		return JobRun{}, false, fmt.Errorf("record skipped %s run at %s: %w", job, row.Tick.Format(time.RFC3339), translate(res.Error))
	}
	if res.RowsAffected == 0 {
		return JobRun{}, false, nil
	}
	return row, true, nil
}

// HeartbeatJobRun says a running run is alive and records its progress.
func (s *Store) HeartbeatJobRun(ctx context.Context, id int64, at time.Time, done, total int64) error {
	res := s.db.WithContext(ctx).Model(&JobRun{}).Where("id = ? AND status = ?", id, JobRunning).
		Updates(map[string]any{"heartbeat_at": utc(at), "progress_done": done, "progress_total": total})
	if res.Error != nil {
		return fmt.Errorf("heartbeat job run %d: %w", id, translate(res.Error))
	}
	return nil
}

// JobFinish is the outcome of a run.
type JobFinish struct {
	At       time.Time
	Status   JobStatus
	Drives   int64
	Readings int64
	// ProgressDone and ProgressTotal are the last progress reported.
	ProgressDone, ProgressTotal int64
	Note                        string
	Error                       string
}

// FinishJobRun writes a run's outcome and returns the row. It writes even
// when another replica has meanwhile marked the row abandoned, because the
// runner that finished knows better.
func (s *Store) FinishJobRun(ctx context.Context, id int64, f JobFinish) (JobRun, error) {
	if f.Status != JobSucceeded && f.Status != JobFailed {
		return JobRun{}, Invalid("status", "a run finishes succeeded or failed, not %q", f.Status)
	}
	at := utc(f.At)
	res := s.db.WithContext(ctx).Model(&JobRun{}).Where("id = ?", id).Updates(map[string]any{
		"status": f.Status, "finished_at": at, "heartbeat_at": at, "drives": f.Drives, "readings": f.Readings,
		"progress_done": f.ProgressDone, "progress_total": f.ProgressTotal, "note": f.Note, "error": f.Error,
	})
	if res.Error != nil {
		return JobRun{}, fmt.Errorf("finish job run %d: %w", id, translate(res.Error))
	}
	if res.RowsAffected == 0 {
		return JobRun{}, fmt.Errorf("finish job run %d: %w", id, ErrNotFound)
	}
	return s.JobRun(ctx, id)
}

// JobRun reads one run.
func (s *Store) JobRun(ctx context.Context, id int64) (JobRun, error) {
	var r JobRun
	if err := s.db.WithContext(ctx).Take(&r, id).Error; err != nil {
		return JobRun{}, fmt.Errorf("read job run %d: %w", id, translate(err))
	}
	return r, nil
}

// JobRunQuery selects job runs.
type JobRunQuery struct {
	Job    string
	Status JobStatus
	Limit  int
	Cursor string
}

// JobRuns lists job runs newest first.
func (s *Store) JobRuns(ctx context.Context, q JobRunQuery) (Page[JobRun], error) {
	before, err := DecodeCursor(q.Cursor)
	if err != nil {
		return Page[JobRun]{}, err
	}
	limit := q.Limit
	if limit <= 0 {
		limit = DefaultLimit
	}
	if limit > MaxLimit {
		return Page[JobRun]{}, Invalid("limit", "must be at most %d", MaxLimit)
	}
	if !GoodText(q.Job) {
		return Page[JobRun]{}, Invalid("job", "%s", BadTextReason)
	}
	db := s.db.WithContext(ctx).Model(&JobRun{})
	if q.Job != "" {
		db = db.Where("job = ?", q.Job)
	}
	if q.Status != "" {
		if !slices.Contains(JobStatuses(), q.Status) {
			return Page[JobRun]{}, Invalid("status", "must be one of running, succeeded, failed, skipped")
		}
		db = db.Where("status = ?", q.Status)
	}
	if before > 0 {
		db = db.Where("id < ?", before)
	}
	var items []JobRun
	if err := db.Order("id DESC").Limit(limit + 1).Find(&items).Error; err != nil {
		return Page[JobRun]{}, fmt.Errorf("list job runs: %w", translate(err))
	}
	page := Page[JobRun]{Items: items}
	if page.Items == nil {
		page.Items = []JobRun{}
	}
	if len(items) > limit {
		page.Items = items[:limit]
		page.Next = EncodeCursor(page.Items[limit-1].ID)
	}
	return page, nil
}

// JobRunStat is what the metrics need of one job: its last finished run
// and its last success, read from the store so every replica reports the
// same values.
type JobRunStat struct {
	Job string
	// LastFinished is the latest run that ran to an end (succeeded or
	// failed; skipped ticks are not runs); nil when none has.
	LastFinished *JobRun
	// LastSuccessAt is when the latest successful run finished; nil when
	// none has.
	LastSuccessAt *time.Time
}

// LastDuration is how long the last finished run took; ok is false when
// no run has finished.
func (st JobRunStat) LastDuration() (d time.Duration, ok bool) {
	if st.LastFinished == nil {
		return 0, false
	}
	return st.LastFinished.Duration()
}

// JobRunStats returns one JobRunStat per named job, in the order given, or
// per job found in job_runs (by name) when none is named. It backs
// kelvard_job_duration_seconds and
// kelvard_job_last_success_timestamp_seconds.
func (s *Store) JobRunStats(ctx context.Context, jobs ...string) ([]JobRunStat, error) {
	db := s.db.WithContext(ctx)
	if len(jobs) == 0 {
		if err := db.Model(&JobRun{}).Distinct("job").Order("job").Pluck("job", &jobs).Error; err != nil {
			return nil, fmt.Errorf("list jobs with runs: %w", translate(err))
		}
	}
	out := make([]JobRunStat, 0, len(jobs))
	for _, job := range jobs {
		st := JobRunStat{Job: job}
		var last []JobRun
		if err := db.Where("job = ? AND status IN ? AND finished_at IS NOT NULL", job, []JobStatus{JobSucceeded, JobFailed}).
			Order("finished_at DESC, id DESC").Limit(1).Find(&last).Error; err != nil {
			return nil, fmt.Errorf("read last %s run: %w", job, translate(err))
		}
		if len(last) == 1 {
			st.LastFinished = &last[0]
		}
		var ok []JobRun
		if err := db.Where("job = ? AND status = ? AND finished_at IS NOT NULL", job, JobSucceeded).
			Order("finished_at DESC, id DESC").Limit(1).Find(&ok).Error; err != nil {
			return nil, fmt.Errorf("read last %s success: %w", job, translate(err))
		}
		if len(ok) == 1 {
			st.LastSuccessAt = ok[0].FinishedAt
		}
		out = append(out, st)
	}
	return out, nil
}

// PruneJobRuns deletes finished runs whose tick is before the cut-off and
// reports how many it deleted. Running rows are kept.
func (s *Store) PruneJobRuns(ctx context.Context, before time.Time) (int64, error) {
	res := s.db.WithContext(ctx).Where("tick < ? AND status <> ?", utc(before), JobRunning).Delete(&JobRun{})
	if res.Error != nil {
		return 0, fmt.Errorf("prune job runs: %w", translate(res.Error))
	}
	return res.RowsAffected, nil
}
