// Package jobs runs kelvard's scheduled work (assessment, planning,
// retention) on cron schedules in UTC, once per scheduled tick across all
// the replicas that share a database, and records every run in job_runs.
//
// How a tick is claimed once: when a job's schedule fires, the tick is the
// scheduled time it fired for, computed from the cron expression on the
// scheduler's clock (a whole scheduled time, never the firing instant), so
// replicas whose clocks differ by a few seconds name the same tick; the
// scheduler inserts the row (job, tick) in job_runs. The first replica to insert it
// runs the job; any other finds the row and does nothing. On PostgreSQL the
// insert happens under a per-job advisory lock; on SQLite under an
// in-process mutex and SQLite's single writer.
package jobs

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/robfig/cron/v3"

	"kelvard/store"
)

// Config sets up a Scheduler. Store and Jobs are required; the rest have
// defaults.
type Config struct {
	Store *store.Store
	// Jobs are the jobs to run; names must be unique.
	Jobs []Job
	// Schedules maps a job name to its cron expression, overriding
	// DefaultSchedules; an empty value keeps the default and Off leaves
	// the job to manual runs. A job with neither runs only on request.
	Schedules map[string]string
	// Seconds lets expressions take a leading seconds field (six fields;
	// five still work), for tests that cannot wait minutes.
	Seconds bool
	// Now is the clock (default time.Now). It must advance with real time
	// but may be offset from the host clock: cron's timers follow it, so a
	// clock 3 s slow fires 3 s late, as on a replica with a slow clock.
	Now func() time.Time
	// StaleAfter is how long a running row may go without a heartbeat
	// before a claim takes its runner for dead and marks it failed
	// (default 10 minutes).
	StaleAfter time.Duration
	// Heartbeat is how often a running run writes its heartbeat and
	// progress (default 30 s; at most half of StaleAfter).
	Heartbeat time.Duration
	// StopGrace is how long Stop waits, once its deadline has passed and
	// the running jobs are cancelled, for them to record their end
	// (default 5 s).
	StopGrace time.Duration
	// Runner names this process in job_runs (default host/pid).
	Runner string
	// Logger receives the scheduler's logs; nil discards them.
	Logger *slog.Logger
}

// entry is one registered job and its schedule.
type entry struct {
	job  Job
	name string
	// spec is the cron expression, "" when the job runs only on request.
	spec  string
	sched cron.Schedule
	// due holds the scheduled times cron has been given and not fired.
	due dueTimes
}

// active is a run going on in this process.
type active struct {
	// id is the job_runs row, 0 until the claim is written.
	id          atomic.Int64
	manual      bool
	since       time.Time
	done, total atomic.Int64
}

// Scheduler runs jobs on their schedules and on request. It is safe for
// concurrent use.
type Scheduler struct {
	cfg     Config
	store   *store.Store
	log     *slog.Logger
	entries []*entry
	byName  map[string]*entry

	// base is the parent of every run's context; Stop cancels it once its
	// deadline has passed.
	base   context.Context
	cancel context.CancelFunc

	// claimMu serialises this process's claims (SQLite has no advisory
	// lock; on PostgreSQL it only saves lock waits).
	claimMu sync.Mutex

	mu      sync.Mutex
	started bool
	stopped bool
	cron    *cron.Cron
	running map[string]*active
	wg      sync.WaitGroup
}

// New checks the configuration and builds a scheduler. It does not start
// the schedules (Start does); manual runs work either way, so a replica
// with its schedules off still serves manual runs.
func New(cfg Config) (*Scheduler, error) {
	if cfg.Store == nil {
		return nil, errors.New("jobs: no store")
	}
	if cfg.Logger == nil {
		cfg.Logger = slog.New(slog.DiscardHandler)
	}
	if cfg.StaleAfter == 0 {
		cfg.StaleAfter = 10 * time.Minute
	}
	if cfg.Heartbeat == 0 {
		cfg.Heartbeat = min(30*time.Second, cfg.StaleAfter/4)
	}
	if cfg.StopGrace == 0 {
		cfg.StopGrace = 5 * time.Second
	}
	if cfg.StaleAfter < 0 || cfg.Heartbeat <= 0 || cfg.Heartbeat > cfg.StaleAfter/2 {
		return nil, fmt.Errorf("jobs: heartbeat %v must be positive and at most half the staleness limit %v", cfg.Heartbeat, cfg.StaleAfter)
	}
	if cfg.Runner == "" {
		host, _ := os.Hostname()
		cfg.Runner = fmt.Sprintf("%s/%d", host, os.Getpid())
	}
	specs := DefaultSchedules()
	for name, spec := range cfg.Schedules {
		if spec = strings.TrimSpace(spec); spec != "" {
			specs[name] = spec
		}
	}
	s := &Scheduler{cfg: cfg, store: cfg.Store, log: cfg.Logger, byName: map[string]*entry{}, running: map[string]*active{}}
	var problems []string
	for _, name := range sortedKeys(specs) {
		if specs[name] == Off {
			continue
		}
		if _, err := parseSchedule(specs[name], cfg.Seconds); err != nil {
			problems = append(problems, fmt.Sprintf("%s schedule %q: %v", name, specs[name], err))
		}
	}
	for _, j := range cfg.Jobs {
		name := j.Name()
		if err := validName(name); err != nil {
			problems = append(problems, err.Error())
			continue
		}
		if s.byName[name] != nil {
			problems = append(problems, fmt.Sprintf("job %q registered twice", name))
			continue
		}
		e := &entry{job: j, name: name}
		if spec := specs[name]; spec != "" && spec != Off {
			if sched, err := parseSchedule(spec, cfg.Seconds); err == nil {
				e.spec, e.sched = spec, sched
			}
		}
		s.entries = append(s.entries, e)
		s.byName[name] = e
	}
	if len(problems) > 0 {
		return nil, fmt.Errorf("jobs: %s", strings.Join(problems, "; "))
	}
	s.base, s.cancel = context.WithCancel(context.Background())
	return s, nil
}

func sortedKeys(m map[string]string) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}

// now is the scheduler's clock in UTC, truncated as the store keeps times.
func (s *Scheduler) now() time.Time {
	if s.cfg.Now == nil {
		return time.Now().UTC().Truncate(time.Microsecond)
	}
	return s.cfg.Now().UTC().Truncate(time.Microsecond)
}

// offset is how far the scheduler's clock runs ahead of the host's.
func (s *Scheduler) offset() time.Duration {
	if s.cfg.Now == nil {
		return 0
	}
	c := s.cfg.Now() // read first, so a rounding error can only make a firing later
	return c.Sub(time.Now())
}

// JobInfo describes a registered job.
type JobInfo struct {
	Name string `json:"name"`
	// Schedule is the cron expression, "" when the job runs only on
	// request.
	Schedule string `json:"schedule"`
	// Next is the next scheduled tick (zero when there is none).
	Next time.Time `json:"next"`
}

// Names lists the registered jobs in registration order.
func (s *Scheduler) Names() []string {
	out := make([]string, len(s.entries))
	for i, e := range s.entries {
		out[i] = e.name
	}
	return out
}

// Jobs describes the registered jobs and their next ticks.
func (s *Scheduler) Jobs() []JobInfo {
	now := s.now()
	out := make([]JobInfo, len(s.entries))
	for i, e := range s.entries {
		out[i] = JobInfo{Name: e.name, Schedule: e.spec}
		if e.sched != nil {
			out[i].Next = e.sched.Next(now).UTC()
		}
	}
	return out
}

// Start starts the schedules. Each job runs in its own goroutine, wrapped
// (outermost first) in cron.SkipIfStillRunning, so a tick that fires while
// the previous run still goes is skipped, never stacked, and cron.Recover,
// so a panic cannot take the process down. The order matters: v3's
// SkipIfStillRunning gives its slot back only when the job returns, so the
// recovery must sit inside it.
func (s *Scheduler) Start() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	if s.stopped {
		return ErrStopped
	}
	if s.started {
		return errors.New("jobs: scheduler already started")
	}
	c := cron.New(cron.WithLocation(time.UTC), cron.WithLogger(cronLogger{s.log}))
	for _, e := range s.entries {
		if e.sched == nil {
			s.log.Info("job runs on request only", slog.String("job", e.name))
			continue
		}
		log := cronLogger{s.log.With(slog.String("job", e.name))}
		job := cron.NewChain(cron.SkipIfStillRunning(skipLogger{cronLogger: log, s: s, e: e}), cron.Recover(log)).
			Then(cron.FuncJob(func() { s.fire(e) }))
		c.Schedule(clockSchedule{inner: e.sched, offset: s.offset, due: &e.due}, job)
		s.log.Info("job scheduled", slog.String("job", e.name), slog.String("schedule", e.spec),
			slog.Time("next_tick", e.sched.Next(s.now()).UTC()))
	}
	c.Start()
	s.cron, s.started = c, true
	return nil
}

// Stop stops the schedules, refuses new runs and waits for the runs in
// progress to finish (graceful shutdown) until ctx is done. If the
// deadline passes first it cancels the runs' contexts, waits up to
// StopGrace for them to record their end, and returns an error naming
// them. Call it before closing the store. A second call returns nil.
func (s *Scheduler) Stop(ctx context.Context) error {
	s.mu.Lock()
	if s.stopped {
		s.mu.Unlock()
		return nil
	}
	s.stopped = true
	c := s.cron
	s.mu.Unlock()
	var cronDone <-chan struct{}
	if c != nil {
		cronDone = c.Stop().Done()
	}
	done := make(chan struct{})
	go func() {
		if cronDone != nil {
			<-cronDone
		}
		s.wg.Wait()
		close(done)
	}()
	select {
	case <-done:
		s.cancel()
		return nil
	case <-ctx.Done():
	}
	names := s.runningNames()
	s.log.Warn("shutdown deadline passed; cancelling running jobs", slog.Any("jobs", names))
	s.cancel()
	select {
	case <-done:
	case <-time.After(s.cfg.StopGrace):
	}
	return fmt.Errorf("stop jobs: %s still running at the shutdown deadline, cancelled: %w", strings.Join(names, ", "), ctx.Err())
}

func (s *Scheduler) runningNames() []string {
	s.mu.Lock()
	defer s.mu.Unlock()
	var out []string
	for name := range s.running {
		out = append(out, name)
	}
	slices.Sort(out)
	return out
}

// Runs lists recorded runs newest first.
func (s *Scheduler) Runs(ctx context.Context, q store.JobRunQuery) (store.Page[store.JobRun], error) {
	return s.store.JobRuns(ctx, q)
}

// Stats returns, for each registered job, its last finished run and last
// success, from the store: the values behind
// kelvard_job_duration_seconds{job} and
// kelvard_job_last_success_timestamp_seconds{job}, the same on every
// replica.
func (s *Scheduler) Stats(ctx context.Context) ([]store.JobRunStat, error) {
	return s.store.JobRunStats(ctx, s.Names()...)
}

// cronLogger sends cron's logs to slog: its chatter at debug, its errors
// (a recovered panic among them) at error.
type cronLogger struct{ log *slog.Logger }

func (l cronLogger) Info(msg string, kv ...any) {
	l.log.Debug("cron "+msg, kv...)
}

func (l cronLogger) Error(err error, msg string, kv ...any) {
	l.log.Error("cron "+msg, append([]any{slog.Any("err", err)}, kv...)...)
}

// skipLogger is the logger of one entry's SkipIfStillRunning wrapper: the
// wrapper's only message is "skip", and the scheduler records the tick it
// skipped.
type skipLogger struct {
	cronLogger
	s *Scheduler
	e *entry
}

func (l skipLogger) Info(msg string, kv ...any) {
	if msg != "skip" {
		l.cronLogger.Info(msg, kv...)
		return
	}
	l.s.skipTick(l.e, "skipped: the previous run is still running here")
}
