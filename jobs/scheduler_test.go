package jobs_test

import (
	"context"
	"errors"
	"log/slog"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
)

// every2s is the test schedule: every two seconds (six fields, seconds
// first).
const every2s = "*/2 * * * * *"

// TestReplicasRunEachTickOnce runs two schedulers on one database over
// several ticks of a 2-second schedule, once with one clock 3 s slow and
// once with the clocks agreeing (both fire at the same instant): every tick
// runs exactly once, and the rows match the invocations.
func TestReplicasRunEachTickOnce(t *testing.T) {
	t.Parallel()
	for _, skew := range []time.Duration{3 * time.Second, 0} {
		t.Run("late "+skew.String(), func(t *testing.T) {
			t.Parallel()
			forEachStore(t, func(t *testing.T, d store.Dialect) {
				stores := openShared(t, d, 2)
				ty := newTally()
				work := func(ctx context.Context, _ int64) error {
					select {
					case <-time.After(300 * time.Millisecond):
						return nil
					case <-ctx.Done():
						return ctx.Err()
					}
				}
				logA, logB := &logCounter{}, &logCounter{}
				a := newScheduler(t, jobs.Config{Store: stores[0], Jobs: []jobs.Job{ty.job("count", "A", work)},
					Schedules: map[string]string{"count": every2s}, Seconds: true, Runner: "A", Logger: slog.New(logA)})
				b := newScheduler(t, jobs.Config{Store: stores[1], Jobs: []jobs.Job{ty.job("count", "B", work)},
					Schedules: map[string]string{"count": every2s}, Seconds: true, Runner: "B",
					Now: func() time.Time { return time.Now().Add(-skew) }, Logger: slog.New(logB)})
				if err := a.Start(); err != nil {
					t.Fatal(err)
				}
				if err := b.Start(); err != nil {
					t.Fatal(err)
				}
				waitFor(t, 30*time.Second, "five ticks", func() bool { return ty.calls.Load() >= 5 })
				time.Sleep(skew + 500*time.Millisecond) // let the late replica fire for the last tick too
				ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
				defer cancel()
				if err := a.Stop(ctx); err != nil {
					t.Fatal(err)
				}
				if err := b.Stop(ctx); err != nil {
					t.Fatal(err)
				}

				ty.mu.Lock()
				defer ty.mu.Unlock()
				for tick, n := range ty.perTick {
					if n != 1 {
						t.Errorf("tick %s ran %d times", tick.Format(time.RFC3339), n)
					}
					if tick.UnixNano()%int64(2*time.Second) != 0 {
						t.Errorf("tick %s is not on the schedule", tick.Format(time.RFC3339Nano))
					}
				}
				// Every tick has one row. A tick runs at most once, and
				// exactly once unless it is recorded as skipped (on a loaded
				// machine a run can outlast the 2 s period).
				runs := allRuns(t, stores[0])
				succeeded := 0
				for i, r := range runs {
					switch r.Status {
					case store.JobSucceeded:
						succeeded++
						if ty.perTick[r.Tick] != 1 || ty.by[r.Tick] != r.Runner {
							t.Errorf("row %+v does not match the invocations (%d, by %q)", r, ty.perTick[r.Tick], ty.by[r.Tick])
						}
					case store.JobSkipped:
						if ty.perTick[r.Tick] != 0 {
							t.Errorf("tick %s recorded as skipped but ran", r.Tick.Format(time.RFC3339))
						}
					default:
						t.Errorf("row %+v", r)
					}
					if i > 0 && r.Tick.Sub(runs[i-1].Tick) != 2*time.Second {
						t.Errorf("ticks %s then %s: a tick was lost or doubled", runs[i-1].Tick.Format(time.RFC3339), r.Tick.Format(time.RFC3339))
					}
				}
				if int64(succeeded) != ty.calls.Load() || succeeded != len(ty.perTick) || succeeded < 5 {
					t.Errorf("%d succeeded rows for %d ticks run and %d invocations", succeeded, len(ty.perTick), ty.calls.Load())
				}
				// The late replica must have fired for ticks the other had
				// already claimed, and found their rows; with agreeing
				// clocks either may lose a tick to the other.
				if skew > 0 && logB.count("tick already claimed") == 0 {
					t.Error("the late replica never found a tick already claimed")
				}
				if logA.count("tick already claimed")+logB.count("tick already claimed") == 0 {
					t.Error("no replica ever found a tick already claimed")
				}
				if skew > 0 && !slices.ContainsFunc(runs, func(r store.JobRun) bool { return r.Runner == "A" }) {
					t.Error("replica A ran no tick")
				}
			})
		})
	}
}

// TestPanicIsRecordedAsFailed: a job that panics is recovered, its run is
// recorded as failed, and the next tick runs normally.
func TestPanicIsRecordedAsFailed(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		st := openShared(t, d, 1)[0]
		ty := newTally()
		job := ty.job("fragile", "A", func(_ context.Context, call int64) error {
			if call == 1 {
				var m map[string]int
				m["boom"]++ // a real nil-map panic
			}
			return nil
		})
		s := newScheduler(t, jobs.Config{Store: st, Jobs: []jobs.Job{job}, Schedules: map[string]string{"fragile": "* * * * * *"}, Seconds: true})
		if err := s.Start(); err != nil {
			t.Fatal(err)
		}
		waitFor(t, 15*time.Second, "a run after the panic", func() bool {
			page, err := s.Runs(context.Background(), store.JobRunQuery{Job: "fragile", Status: store.JobSucceeded})
			return err == nil && len(page.Items) > 0
		})
		runs := allRuns(t, st)
		if runs[0].Status != store.JobFailed || !strings.Contains(runs[0].Error, "panic: assignment to entry in nil map") || runs[0].FinishedAt == nil {
			t.Errorf("panicking run recorded as %+v", runs[0])
		}
		if runs[1].Status != store.JobSucceeded || runs[1].Drives != 2 || runs[1].Readings != 10 || runs[1].Note != "counted" {
			t.Errorf("run after the panic recorded as %+v", runs[1])
		}
	})
}

// TestLongJobIsSkippedNotStacked: a run longer than the period is never
// stacked; the ticks that come due meanwhile are recorded as skipped.
func TestLongJobIsSkippedNotStacked(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		st := openShared(t, d, 1)[0]
		ty := newTally()
		job := ty.job("slow", "A", func(ctx context.Context, call int64) error {
			if call == 1 {
				time.Sleep(3200 * time.Millisecond)
			}
			return nil
		})
		s := newScheduler(t, jobs.Config{Store: st, Jobs: []jobs.Job{job}, Schedules: map[string]string{"slow": "* * * * * *"}, Seconds: true})
		if err := s.Start(); err != nil {
			t.Fatal(err)
		}
		waitFor(t, 20*time.Second, "a run after the long one", func() bool { return ty.calls.Load() >= 2 })
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		if err := s.Stop(ctx); err != nil {
			t.Fatal(err)
		}
		if p := ty.peak.Load(); p != 1 {
			t.Errorf("%d runs overlapped", p)
		}
		runs := allRuns(t, st)
		var skipped []store.JobRun
		for _, r := range runs {
			if r.Status == store.JobSkipped {
				skipped = append(skipped, r)
			}
		}
		if len(skipped) < 2 {
			t.Fatalf("%d skipped ticks during a 3.2 s run on a 1 s schedule: %+v", len(skipped), runs)
		}
		first := runs[0]
		for _, r := range skipped {
			if !strings.Contains(r.Note, "still running here") || !r.Tick.After(first.Tick) || r.Tick.After(*first.FinishedAt) {
				t.Errorf("skipped row %+v (long run %s to %s)", r, first.Tick, first.FinishedAt)
			}
		}
		if int64(len(runs)-len(skipped)) != ty.calls.Load() {
			t.Errorf("%d run rows for %d invocations", len(runs)-len(skipped), ty.calls.Load())
		}
	})
}

// TestStopWaitsForRunningJob: Stop returns only after the running job has
// finished and recorded its end; past its deadline it cancels the job.
func TestStopWaitsForRunningJob(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		st := openShared(t, d, 1)[0]
		started := make(chan struct{}, 4)
		var finished time.Time
		job := funcJob{name: "steady", run: func(ctx context.Context, _ time.Time, _ func(int, int)) (jobs.Stats, error) {
			started <- struct{}{}
			time.Sleep(1500 * time.Millisecond)
			finished = time.Now()
			return jobs.Stats{Note: "done"}, nil
		}}
		s, err := jobs.New(jobs.Config{Store: st, Jobs: []jobs.Job{job}, Schedules: map[string]string{"steady": "* * * * * *"}, Seconds: true})
		if err != nil {
			t.Fatal(err)
		}
		if err := s.Start(); err != nil {
			t.Fatal(err)
		}
		<-started
		ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
		defer cancel()
		if err := s.Stop(ctx); err != nil {
			t.Fatal(err)
		}
		stopped := time.Now()
		if finished.IsZero() || stopped.Before(finished) {
			t.Fatalf("Stop returned at %v, before the job finished (%v)", stopped, finished)
		}
		runs := allRuns(t, st)
		if len(runs) != 1 || runs[0].Status != store.JobSucceeded || runs[0].Note != "done" {
			t.Errorf("runs after a graceful stop: %+v", runs)
		}
		if _, err := s.RunNow(context.Background(), "steady"); !errors.Is(err, jobs.ErrStopped) {
			t.Errorf("RunNow after Stop: %v, want ErrStopped", err)
		}
		if err := s.Start(); !errors.Is(err, jobs.ErrStopped) {
			t.Errorf("Start after Stop: %v, want ErrStopped", err)
		}
	})
}

func TestStopDeadlineCancelsJob(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		st := openShared(t, d, 1)[0]
		started := make(chan struct{}, 1)
		job := funcJob{name: "stubborn", run: func(ctx context.Context, _ time.Time, _ func(int, int)) (jobs.Stats, error) {
			started <- struct{}{}
			<-ctx.Done()
			return jobs.Stats{}, ctx.Err()
		}}
		s, err := jobs.New(jobs.Config{Store: st, Jobs: []jobs.Job{job}})
		if err != nil {
			t.Fatal(err)
		}
		run, err := s.RunNow(context.Background(), "stubborn")
		if err != nil {
			t.Fatal(err)
		}
		<-started
		ctx, cancel := context.WithTimeout(context.Background(), 300*time.Millisecond)
		defer cancel()
		err = s.Stop(ctx)
		if !errors.Is(err, context.DeadlineExceeded) || !strings.Contains(err.Error(), "stubborn") {
			t.Fatalf("Stop past its deadline: %v", err)
		}
		got, err := st.JobRun(context.Background(), run.ID)
		if err != nil {
			t.Fatal(err)
		}
		if got.Status != store.JobFailed || got.Error != "cancelled: the server shut down during the run" {
			t.Errorf("cancelled run recorded as %+v", got)
		}
	})
}

// TestStaleRunningRow: a running row whose runner still sends heartbeats
// makes the ticks skip; once its heartbeat is older than the staleness
// limit, the next tick marks it failed and runs normally.
func TestStaleRunningRow(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		st := openShared(t, d, 1)[0]
		ctx := context.Background()
		// A replica claimed a tick and then crashed: its row stays running.
		now := time.Now().UTC()
		dead, _, err := st.ClaimJobRun(ctx, store.JobClaim{Job: "roll", Tick: now.Truncate(time.Second).Add(-time.Minute),
			Runner: "crashed/1", Now: now, StaleBefore: now.Add(-time.Hour)})
		if err != nil {
			t.Fatal(err)
		}
		ty := newTally()
		s := newScheduler(t, jobs.Config{Store: st, Jobs: []jobs.Job{ty.job("roll", "A", nil)}, Schedules: map[string]string{"roll": "* * * * * *"},
			Seconds: true, StaleAfter: 3 * time.Second, Heartbeat: time.Second})
		if err := s.Start(); err != nil {
			t.Fatal(err)
		}
		waitFor(t, 20*time.Second, "a run after the stale row", func() bool { return ty.calls.Load() >= 1 })
		got, err := st.JobRun(ctx, dead.ID)
		if err != nil {
			t.Fatal(err)
		}
		if got.Status != store.JobFailed || !strings.Contains(got.Error, "abandoned") || got.FinishedAt == nil {
			t.Errorf("crashed run after the staleness limit: %+v", got)
		}
		runs := allRuns(t, st)
		skipped := 0
		for _, r := range runs {
			if r.Status == store.JobSkipped {
				skipped++
				if !strings.Contains(r.Note, "crashed/1") {
					t.Errorf("skip note %q does not name the running run", r.Note)
				}
				if !r.Tick.Before(got.FinishedAt.Add(time.Second)) {
					t.Errorf("tick %s skipped after the crashed run was failed at %s", r.Tick, got.FinishedAt)
				}
			}
		}
		// While the crashed row was fresh (under 3 s old) the ticks were
		// skipped, not run.
		if skipped < 1 {
			t.Errorf("no tick skipped while the crashed run still looked alive: %+v", runs)
		}
		if ty.calls.Load() < 1 {
			t.Error("the job never ran after the crashed run went stale")
		}
	})
}

// TestManualRun: RunNow records a manual run in the background and refuses
// a second one while the first runs, here or on another replica.
func TestManualRun(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		stores := openShared(t, d, 2)
		release := make(chan struct{})
		progressed := make(chan struct{}, 2)
		job := funcJob{name: "assess", run: func(ctx context.Context, tick time.Time, progress func(int, int)) (jobs.Stats, error) {
			progress(3, 7)
			progressed <- struct{}{}
			<-release
			progress(7, 7)
			return jobs.Stats{Drives: 7, Readings: 700, Note: "7 drives"}, nil
		}}
		a := newScheduler(t, jobs.Config{Store: stores[0], Jobs: []jobs.Job{job}, Runner: "A", Heartbeat: 100 * time.Millisecond, StaleAfter: time.Minute})
		b := newScheduler(t, jobs.Config{Store: stores[1], Jobs: []jobs.Job{funcJob{name: "assess", run: job.run}}, Runner: "B"})
		ctx := store.WithPrincipal(context.Background(), store.Principal{Actor: "token 4 (ops)"})
		before := time.Now().UTC().Truncate(time.Microsecond)
		run, err := a.RunNow(ctx, "assess")
		if err != nil {
			t.Fatal(err)
		}
		if run.Status != store.JobRunning || !run.Manual || run.RequestedBy != "token 4 (ops)" || run.Runner != "A" || run.Tick.Before(before) {
			t.Errorf("manual run row %+v", run)
		}
		if _, err := a.RunNow(ctx, "assess"); !errors.Is(err, jobs.ErrAlreadyRunning) || !strings.Contains(err.Error(), "running here") {
			t.Errorf("second RunNow here: %v, want ErrAlreadyRunning", err)
		}
		if _, err := b.RunNow(ctx, "assess"); !errors.Is(err, jobs.ErrAlreadyRunning) || !strings.Contains(err.Error(), "on A") {
			t.Errorf("RunNow on another replica: %v, want ErrAlreadyRunning naming A", err)
		}
		if _, err := a.RunNow(ctx, "nope"); !errors.Is(err, jobs.ErrUnknownJob) || !strings.Contains(err.Error(), "assess") {
			t.Errorf("RunNow of an unknown job: %v", err)
		}
		<-progressed
		waitFor(t, 5*time.Second, "a heartbeat with progress", func() bool {
			r, err := stores[0].JobRun(context.Background(), run.ID)
			return err == nil && r.ProgressDone == 3 && r.ProgressTotal == 7
		})
		close(release)
		waitFor(t, 5*time.Second, "the manual run to finish", func() bool {
			r, err := stores[0].JobRun(context.Background(), run.ID)
			return err == nil && r.Status == store.JobSucceeded
		})
		got, _ := stores[0].JobRun(context.Background(), run.ID)
		if got.Drives != 7 || got.Readings != 700 || got.ProgressDone != 7 || got.Note != "7 drives" {
			t.Errorf("finished manual run %+v", got)
		}
		// Once it has finished, the other replica may run it.
		done, err := b.Run(context.Background(), "assess", nil)
		if err != nil || done.Status != store.JobSucceeded || done.Runner != "B" || done.RequestedBy != "system" {
			t.Errorf("synchronous run on B: %v %+v", err, done)
		}
	})
}

// TestRunReportsProgressAndError: the synchronous Run passes progress to
// the caller and returns the job's error with a failed row.
func TestRunReportsProgressAndError(t *testing.T) {
	t.Parallel()
	st := openShared(t, store.SQLite, 1)[0]
	job := funcJob{name: "assess", run: func(ctx context.Context, tick time.Time, progress func(int, int)) (jobs.Stats, error) {
		for i := 1; i <= 4; i++ {
			progress(i, 4)
		}
		return jobs.Stats{Drives: 4}, errors.New("drive 3: model 9 has no capacitor rating")
	}}
	s := newScheduler(t, jobs.Config{Store: st, Jobs: []jobs.Job{job}})
	var seen [][2]int
	run, err := s.Run(context.Background(), "assess", func(done, total int) { seen = append(seen, [2]int{done, total}) })
	if err == nil || !strings.Contains(err.Error(), "no capacitor rating") {
		t.Fatalf("Run error %v", err)
	}
	if run.Status != store.JobFailed || run.Error != "drive 3: model 9 has no capacitor rating" || run.Drives != 4 || run.ProgressDone != 4 {
		t.Errorf("failed run %+v", run)
	}
	if len(seen) != 4 || seen[3] != [2]int{4, 4} {
		t.Errorf("progress seen %v", seen)
	}
	stats, err := s.Stats(context.Background())
	if err != nil || len(stats) != 1 || stats[0].LastFinished == nil || stats[0].LastSuccessAt != nil {
		t.Errorf("stats after one failed run: %v %+v", err, stats)
	}
}

func TestNewRefusesBadConfig(t *testing.T) {
	t.Parallel()
	st := openShared(t, store.SQLite, 1)[0]
	noop := func(name string) jobs.Job {
		return funcJob{name: name, run: func(context.Context, time.Time, func(int, int)) (jobs.Stats, error) { return jobs.Stats{}, nil }}
	}
	cases := []struct {
		name string
		cfg  jobs.Config
		want string
	}{
		{"no store", jobs.Config{}, "no store"},
		{"bad schedule", jobs.Config{Store: st, Jobs: []jobs.Job{noop(jobs.Assess)}, Schedules: map[string]string{jobs.Assess: "every minute"}}, `assess schedule "every minute"`},
		{"every", jobs.Config{Store: st, Schedules: map[string]string{jobs.Plan: "@every 1h"}}, "@every"},
		{"twice", jobs.Config{Store: st, Jobs: []jobs.Job{noop("x"), noop("x")}}, `"x" registered twice`},
		{"bad name", jobs.Config{Store: st, Jobs: []jobs.Job{noop("Assess Now")}}, "lower-case"},
		{"heartbeat", jobs.Config{Store: st, StaleAfter: time.Minute, Heartbeat: time.Minute}, "at most half"},
	}
	for _, c := range cases {
		if _, err := jobs.New(c.cfg); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: New = %v, want an error containing %q", c.name, err, c.want)
		}
	}
	s, err := jobs.New(jobs.Config{Store: st, Jobs: []jobs.Job{noop(jobs.Assess), noop(jobs.Plan), noop("rollup")},
		Schedules: map[string]string{jobs.Plan: jobs.Off}})
	if err != nil {
		t.Fatal(err)
	}
	info := s.Jobs()
	if len(info) != 3 || info[0].Schedule != "*/15 * * * *" || info[0].Next.Minute()%15 != 0 || info[1].Schedule != "" || info[2].Schedule != "" || !info[2].Next.IsZero() {
		t.Errorf("jobs %+v", info)
	}
}
