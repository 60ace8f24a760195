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

// Shape of the replicas test: two processes with a one-second assessment
// schedule, watched for a stretch of ticks.
const (
	replicaSchedule = "* * * * * *" // every second (seconds field first)
	replicaWatch    = 10 * time.Second
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
// PostgreSQL schema with the assessment scheduled every second: every
// tick while both run has exactly one job_runs row, no tick is lost, and
// the logs show each tick run by one process only, the one its row names,
// while the other found it claimed.
func TestReplicasClaimEachTickOnce(t *testing.T) {
	t.Parallel()
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
	from := time.Now().UTC().Truncate(time.Second).Add(2 * time.Second).Round(0)
	to := from.Add(replicaWatch)
	if !poll(replicaWatch+30*time.Second, 100*time.Millisecond, func() bool {
		var n int64
		err := st.DB(ctx).Model(&store.JobRun{}).Where("job = ? AND tick >= ?", jobs.Assess, to.Add(time.Second)).Count(&n).Error
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
	for tick := from; !tick.After(to); tick = tick.Add(time.Second) {
		if _, ok := byTick[tick.Unix()]; !ok {
			t.Errorf("tick %s was lost: no row", tick.Format(time.RFC3339))
		}
	}

	// What each process says it did with each tick.
	ran := map[int64][]string{}     // tick (Unix seconds) → runner that ran it
	claimed := map[int64][]string{} // tick → runner that found it claimed
	for name, s := range map[string]*server{"A": a, "B": b} {
		runner := runnerOf(t, s)
		sc := bufio.NewScanner(strings.NewReader(s.stderr.String()))
		sc.Buffer(make([]byte, 1<<20), 1<<20)
		for sc.Scan() {
			var l logLine
			if json.Unmarshal(sc.Bytes(), &l) != nil || l.Job != jobs.Assess || l.Tick.Before(from) || l.Tick.After(to) {
				continue
			}
			switch l.Msg {
			case "job run succeeded", "job run failed":
				ran[l.Tick.Unix()] = append(ran[l.Tick.Unix()], runner)
			case "tick already claimed", "tick skipped":
				claimed[l.Tick.Unix()] = append(claimed[l.Tick.Unix()], runner)
			}
		}
		t.Logf("replica %s (%s) claimed %d of the %d ticks", name, runner, runners[runner], int(replicaWatch/time.Second)+1)
	}
	for tick := from; !tick.After(to); tick = tick.Add(time.Second) {
		k := tick.Unix()
		r := byTick[k]
		switch {
		case r.Status == store.JobSucceeded && (len(ran[k]) != 1 || ran[k][0] != r.Runner):
			t.Errorf("tick %s: row by %s, but run by %v", tick.Format(time.RFC3339), r.Runner, ran[k])
		case r.Status == store.JobSkipped && len(ran[k]) != 0:
			t.Errorf("tick %s: recorded as skipped but run by %v", tick.Format(time.RFC3339), ran[k])
		}
		if len(ran[k])+len(claimed[k]) != 2 {
			t.Errorf("tick %s: run by %v, found claimed by %v: each replica should have fired once", tick.Format(time.RFC3339), ran[k], claimed[k])
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
	t.Parallel()
	cmd := exec.Command(kelvardBin, "serve", "--listen", "127.0.0.1:0", "--assess-schedule", replicaSchedule)
	cmd.Env = childEnv(map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, store.SQLite)})
	out, err := cmd.CombinedOutput()
	if cmd.ProcessState == nil || cmd.ProcessState.ExitCode() != 2 || !strings.Contains(string(out), "assess schedule") {
		t.Errorf("serve with a seconds schedule: %v\n%s", err, out)
	}
}
