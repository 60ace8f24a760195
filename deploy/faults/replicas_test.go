package faults

import (
	"bufio"
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"os"
	"os/exec"
	"strings"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// Shape of the replicas test: two processes with an assessment every two
// seconds, watched for a stretch of ticks. (Every second works too; two
// leave a loaded machine more room before a late timer skips a tick in
// both processes at once.)
const (
	replicaSchedule = "*/2 * * * * *" // seconds field first
	replicaPeriod   = 2 * time.Second
	replicaWatch    = 14 * time.Second
	replicaDrives   = 20
)

// logLine is the part of a JSON log line the replicas test reads.
type logLine struct {
	Msg  string    `json:"msg"`
	Job  string    `json:"job"`
	Tick time.Time `json:"tick"`
	Run  int64     `json:"run"`
}

// TestReplicasClaimEachTickOnce runs two server processes on one
// PostgreSQL schema with the assessment scheduled every two seconds: every
// tick while both run has exactly one job_runs row (none lost, none
// twice), and the logs show each tick run by one process only, the one its
// row names, and no process firing a tick twice.
func TestReplicasClaimEachTickOnce(t *testing.T) {
	url := storetest.URL(t, store.Postgres)
	st := openStore(t, url)
	f := buildFleet(t, st, replicaDrives)
	ctx := context.Background()
	for p, tag := range f.tags {
		if _, err := st.Ingest(ctx, batch(tag, p, 0, 200, time.Hour), store.IngestOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	env := map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_LOG_LEVEL": "debug",
		"KELVARD_SCHEDULE_SECONDS": "1", "KELVARD_ASSESS_SCHEDULE": replicaSchedule, "KELVARD_RETENTION_SCHEDULE": "off"}
	a := startServer(t, env)
	b := startServer(t, env)
	a.waitReadyz(t, http.StatusOK, startTimeout)
	b.waitReadyz(t, http.StatusOK, startTimeout)
	// Ticks strictly inside the stretch both processes were firing.
	from := time.Now().UTC().Truncate(replicaPeriod).Add(2 * replicaPeriod).Round(0)
	to := from.Add(replicaWatch)
	if !poll(replicaWatch+30*time.Second, 100*time.Millisecond, func() bool {
		var n int64
		err := st.DB(ctx).Model(&store.JobRun{}).Where("job = ? AND tick >= ?", jobs.Assess, to.Add(replicaPeriod)).Count(&n).Error
		return err == nil && n > 0
	}) {
		t.Fatalf("no tick after %v was claimed", to.Format(time.RFC3339))
	}
	for name, s := range map[string]*server{"A": a, "B": b} {
		if code := s.terminate(t); code != 0 {
			t.Errorf("replica %s exited with %d", name, code)
		}
	}

	var rows []store.JobRun
	if err := st.DB(ctx).Where("job = ? AND NOT manual", jobs.Assess).Order("tick, id").Find(&rows).Error; err != nil {
		t.Fatal(err)
	}
	byTick := map[int64]store.JobRun{} // Unix seconds
	runners := map[string]int{}
	for _, r := range rows {
		if prev, dup := byTick[r.Tick.Unix()]; dup {
			t.Errorf("tick %s has two rows: %d by %s and %d by %s", r.Tick.Format(time.RFC3339), prev.ID, prev.Runner, r.ID, r.Runner)
		}
		byTick[r.Tick.Unix()] = r
		if r.Tick.Before(from) || r.Tick.After(to) {
			continue
		}
		runners[r.Runner]++
		if r.Status != store.JobSucceeded && r.Status != store.JobSkipped {
			t.Errorf("tick %s: %s %q", r.Tick.Format(time.RFC3339), r.Status, r.Error)
		}
	}
	for tick := from; !tick.After(to); tick = tick.Add(replicaPeriod) {
		if _, ok := byTick[tick.Unix()]; !ok {
			t.Errorf("tick %s was lost: no row", tick.Format(time.RFC3339))
		}
	}

	// What each process says it did with each tick.
	ran := map[int64][]string{} // tick (Unix seconds) → runners that ran it
	fired := map[string]int{}   // runner and tick → firings
	for name, s := range map[string]*server{"A": a, "B": b} {
		runner := runnerOf(t, s)
		sc := bufio.NewScanner(strings.NewReader(s.stderr.String()))
		sc.Buffer(make([]byte, 1<<20), 1<<20)
		for sc.Scan() {
			var l logLine
			if json.Unmarshal(sc.Bytes(), &l) != nil || l.Job != jobs.Assess || l.Tick.Before(from) || l.Tick.After(to) {
				continue
			}
			key := fmt.Sprintf("%s at %s", runner, l.Tick.Format(time.RFC3339))
			switch l.Msg {
			case "job run succeeded", "job run failed":
				ran[l.Tick.Unix()] = append(ran[l.Tick.Unix()], runner)
				fired[key]++
			case "tick already claimed", "tick skipped", "tick already recorded":
				fired[key]++
			}
		}
		t.Logf("replica %s (%s) claimed %d of the %d ticks", name, runner, runners[runner], int(replicaWatch/replicaPeriod)+1)
	}
	for key, n := range fired {
		if n > 1 {
			t.Errorf("%s: fired %d times", key, n)
		}
	}
	for tick := from; !tick.After(to); tick = tick.Add(replicaPeriod) {
		k := tick.Unix()
		r := byTick[k]
		switch {
		case r.Status == store.JobSucceeded && (len(ran[k]) != 1 || ran[k][0] != r.Runner):
			t.Errorf("tick %s: row by %s, but run by %v", tick.Format(time.RFC3339), r.Runner, ran[k])
		case r.Status == store.JobSkipped && len(ran[k]) != 0:
			t.Errorf("tick %s: recorded as skipped but run by %v", tick.Format(time.RFC3339), ran[k])
		}
		for _, s := range []*server{a, b} {
			if key := fmt.Sprintf("%s at %s", runnerOf(t, s), tick.Format(time.RFC3339)); fired[key] == 0 {
				// A timer woken late by a loaded machine skips a tick in
				// that process; the other claimed it, which is the point.
				t.Logf("%s did not fire", key)
			}
		}
	}
}

// runnerOf is the runner name a server writes in job_runs: host/pid.
func runnerOf(t *testing.T, s *server) string {
	t.Helper()
	host, err := os.Hostname()
	if err != nil {
		t.Fatal(err)
	}
	return fmt.Sprintf("%s/%d", host, s.cmd.Process.Pid)
}

// TestSecondsScheduleIsTestOnly: without KELVARD_SCHEDULE_SECONDS a
// six-field schedule is refused as a usage error.
func TestSecondsScheduleIsTestOnly(t *testing.T) {
	cmd := exec.Command(kelvardBin, "serve", "--listen", "127.0.0.1:0", "--assess-schedule", replicaSchedule)
	cmd.Env = childEnv(map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, store.SQLite)})
	out, err := cmd.CombinedOutput()
	if cmd.ProcessState == nil || cmd.ProcessState.ExitCode() != 2 || !strings.Contains(string(out), "assess schedule") {
		t.Errorf("serve with a seconds schedule: %v\n%s", err, out)
	}
}
