package main

import (
	"context"
	"flag"
	"fmt"
	"log/slog"
	"strings"
	"time"

	"kelvard/jobs"
	"kelvard/store"
)

// jobSource builds the jobs `serve` runs, over the opened store.
type jobSource func(st *store.Store, log *slog.Logger) []jobs.Job

// builtinJobs is the hook where kelvard's jobs join `serve`: each job
// package adds its constructor to this list as it lands (the assessment,
// the planning, the retention). A job named in jobs.DefaultSchedules takes
// that schedule unless its flag sets another; any other job runs on
// request only. With the list empty the scheduler has nothing to fire, and
// the job endpoints list runs and answer 404 for a run of an unknown job.
func builtinJobs(st *store.Store, log *slog.Logger) []jobs.Job {
	return []jobs.Job{}
}

// jobFlags are serve's scheduler settings.
type jobFlags struct {
	scheduler   string
	schedules   map[string]*string
	staleAfter  time.Duration
	stopTimeout time.Duration
}

// addJobFlags registers the scheduler flags on fs, their defaults taken
// from the environment.
func addJobFlags(fs *flag.FlagSet, getenv func(string) string) *jobFlags {
	f := &jobFlags{schedules: map[string]*string{}}
	fs.StringVar(&f.scheduler, "scheduler", envOr(getenv, "KELVARD_SCHEDULER", "on"),
		"on: this replica fires the job schedules; off: it serves manual runs only (KELVARD_SCHEDULER)")
	defaults := jobs.DefaultSchedules()
	for _, name := range []string{jobs.Assess, jobs.Plan, jobs.Retention} {
		env := "KELVARD_" + strings.ToUpper(name) + "_SCHEDULE"
		f.schedules[name] = fs.String(name+"-schedule", envOr(getenv, env, defaults[name]),
			fmt.Sprintf("cron expression (minute hour day month weekday, UTC) for the %s job, or off (%s)", name, env))
	}
	fs.DurationVar(&f.staleAfter, "job-stale-after", envDuration(getenv, "KELVARD_JOB_STALE_AFTER", 10*time.Minute),
		"a running job whose heartbeat is older is taken to have died with its replica (KELVARD_JOB_STALE_AFTER)")
	fs.DurationVar(&f.stopTimeout, "job-stop-timeout", envDuration(getenv, "KELVARD_JOB_STOP_TIMEOUT", 30*time.Second),
		"at shutdown, how long to wait for a running job before cancelling it (KELVARD_JOB_STOP_TIMEOUT)")
	return f
}

// envDuration reads a duration default from the environment; a value that
// does not parse is left for the flag package to report.
func envDuration(getenv func(string) string, key string, def time.Duration) time.Duration {
	if v := getenv(key); v != "" {
		if d, err := time.ParseDuration(v); err == nil {
			return d
		}
	}
	return def
}

// build makes the scheduler over the jobs; it refuses bad settings as
// usage errors.
func (f *jobFlags) build(st *store.Store, log *slog.Logger, js []jobs.Job) (*jobs.Scheduler, error) {
	if f.scheduler != "on" && f.scheduler != "off" {
		return nil, usageError{fmt.Errorf("--scheduler %q: want on or off", f.scheduler)}
	}
	schedules := map[string]string{}
	for name, spec := range f.schedules {
		schedules[name] = *spec
	}
	s, err := jobs.New(jobs.Config{Store: st, Jobs: js, Schedules: schedules, StaleAfter: f.staleAfter,
		Logger: log.With(slog.String("component", "jobs"))})
	if err != nil {
		return nil, usageError{err}
	}
	return s, nil
}

// start fires the schedules when the scheduler is on for this replica.
func (f *jobFlags) start(s *jobs.Scheduler, log *slog.Logger) error {
	if f.scheduler == "off" {
		log.Info("scheduler off on this replica: jobs run only on request", slog.Any("jobs", s.Names()))
		return nil
	}
	if len(s.Names()) == 0 {
		log.Info("scheduler on, no jobs registered")
	}
	return s.Start()
}

// stop stops the scheduler, waiting up to the stop timeout for a running
// job to finish.
func (f *jobFlags) stop(s *jobs.Scheduler, log *slog.Logger) {
	ctx, cancel := context.WithTimeout(context.Background(), f.stopTimeout)
	defer cancel()
	if err := s.Stop(ctx); err != nil {
		log.Error("stop jobs", slog.Any("err", err))
	}
}
