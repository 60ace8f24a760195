package main

import (
	"bytes"
	"context"
	"encoding/json"
	"log/slog"
	"net/http"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// slowJob takes a while and records when it finished.
type slowJob struct {
	started  chan struct{}
	finished *atomic.Int64 // UnixNano
}

func (slowJob) Name() string { return "sweep" }

func (j slowJob) Run(ctx context.Context, _ time.Time, progress func(int, int)) (jobs.Stats, error) {
	close(j.started)
	time.Sleep(1500 * time.Millisecond)
	j.finished.Store(time.Now().UnixNano())
	return jobs.Stats{Note: "swept"}, nil
}

// TestServeWaitsForRunningJob starts serve with a job, starts a manual run
// through the API and shuts the server down while it runs: serve returns
// only after the job has finished and its row is written.
func TestServeWaitsForRunningJob(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			secret, err := store.NewSecret()
			if err != nil {
				t.Fatal(err)
			}
			url := storetest.URL(t, d)
			env := map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_BOOTSTRAP_TOKEN": secret, "KELVARD_LOG_LEVEL": "info"}
			job := slowJob{started: make(chan struct{}), finished: &atomic.Int64{}}
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			out, errOut := &syncBuffer{}, &syncBuffer{}
			done := make(chan error, 1)
			go func() {
				done <- cmdServe(ctx, []string{"--listen", "127.0.0.1:0"}, func(k string) string { return env[k] }, out, errOut,
					func(*store.Store, *slog.Logger) []jobs.Job { return []jobs.Job{job} })
			}()
			var base string
			deadline := time.Now().Add(30 * time.Second)
			for base == "" {
				if m := addrRE.FindStringSubmatch(out.String()); m != nil {
					base = m[1]
				} else if time.Now().After(deadline) {
					t.Fatalf("serve printed no address: %s", errOut.String())
				}
				time.Sleep(20 * time.Millisecond)
			}
			code, body := call(t, "POST", base+"/api/v1/jobs/sweep/run", secret, "")
			var run store.JobRun
			if code != http.StatusAccepted || json.Unmarshal(body, &run) != nil || run.Status != store.JobRunning {
				t.Fatalf("start run: %d %s", code, body)
			}
			<-job.started
			cancel() // SIGTERM
			select {
			case err := <-done:
				if err != nil {
					t.Fatalf("serve: %v", err)
				}
			case <-time.After(30 * time.Second):
				t.Fatal("serve did not stop")
			}
			returned := time.Now().UnixNano()
			if f := job.finished.Load(); f == 0 || f > returned {
				t.Fatalf("serve returned before the running job finished")
			}
			st, err := store.Open(context.Background(), url, store.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer st.Close()
			got, err := st.JobRun(context.Background(), run.ID)
			if err != nil || got.Status != store.JobSucceeded || got.Note != "swept" {
				t.Errorf("run after shutdown: %v %+v", err, got)
			}
			if !strings.Contains(errOut.String(), `"job runs on request only"`) || !strings.Contains(errOut.String(), `"job":"sweep"`) {
				t.Errorf("log does not say sweep runs on request only:\n%s", errOut.String())
			}
		})
	}
}

// TestServeSchedulerOff: a replica with the scheduler off still lists runs.
func TestServeSchedulerOff(t *testing.T) {
	t.Parallel()
	secret, err := store.NewSecret()
	if err != nil {
		t.Fatal(err)
	}
	env := map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, store.SQLite), "KELVARD_BOOTSTRAP_TOKEN": secret,
		"KELVARD_LOG_LEVEL": "info", "KELVARD_SCHEDULER": "off"}
	srv := startServe(t, env)
	code, body := call(t, "GET", srv.base+"/api/v1/jobs", secret, "")
	if code != http.StatusOK || !strings.Contains(string(body), `"items":[]`) {
		t.Errorf("list runs: %d %s", code, body)
	}
	srv.stop(t)
	if !strings.Contains(srv.stderr.String(), "scheduler off on this replica") {
		t.Errorf("log does not say the scheduler is off:\n%s", srv.stderr.String())
	}
}

// TestServeRefusesBadJobSettings: bad scheduler settings are usage errors
// (exit status 2) that name the setting.
func TestServeRefusesBadJobSettings(t *testing.T) {
	t.Parallel()
	url := storetest.URL(t, store.SQLite)
	cases := []struct {
		env  map[string]string
		args []string
		want string
	}{
		{map[string]string{"KELVARD_SCHEDULER": "sometimes"}, nil, `--scheduler "sometimes"`},
		{map[string]string{"KELVARD_ASSESS_SCHEDULE": "every minute"}, nil, `assess schedule "every minute"`},
		{nil, []string{"--plan-schedule", "@every 1h"}, "@every"},
		{nil, []string{"--job-stale-after", "soon"}, "job-stale-after"},
	}
	for _, c := range cases {
		env := map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_LOG_LEVEL": "warn"}
		for k, v := range c.env {
			env[k] = v
		}
		var out, errOut bytes.Buffer
		args := append([]string{"serve", "--listen", "127.0.0.1:0"}, c.args...)
		code := run(context.Background(), args, func(k string) string { return env[k] }, &out, &errOut)
		if code != 2 || !strings.Contains(errOut.String(), c.want) {
			t.Errorf("%v %v: exit %d, stderr %q; want 2 and %q", c.env, c.args, code, errOut.String(), c.want)
		}
	}
}
