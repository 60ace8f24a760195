package faults

import (
	"context"
	"encoding/json"
	"fmt"
	"math"
	"net/http"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// Shape of the outage test: enough readings that the assessment takes a
// second or two, so the database can be stopped while it runs.
const (
	outageDrives    = 100
	outagePerDrive  = 1200
	outageBatchSize = 400
	outageSenders   = 4
	outageStep      = time.Hour
	// outageBackoff is how long a sender waits after a 503 before it
	// posts again: shorter than the Retry-After the server asks for, to
	// keep the test short.
	outageBackoff = 100 * time.Millisecond
)

// TestPostgresOutage stops and starts PostgreSQL (a private cluster) under
// a running server: during a stream of readings posts, and during an
// assessment. The server stays up throughout; /readyz turns unready and
// then ready again; while the database is away clients get 503 problems
// with Retry-After, never a 500 and never a dropped connection; every
// reading is stored once; and the assessment that follows equals an
// undisturbed assessment of the same readings on another database.
func TestPostgresOutage(t *testing.T) {
	pg := newPGCluster(t)
	url := pg.url("test")
	st := openStore(t, url)
	f := buildFleet(t, st, outageDrives)
	ref := openStore(t, storetest.URL(t, store.Postgres))
	buildFleet(t, ref, outageDrives)

	secret, err := store.NewSecret()
	if err != nil {
		t.Fatal(err)
	}
	srv := startServer(t, map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_BOOTSTRAP_TOKEN": secret, "KELVARD_LOG_LEVEL": "info"},
		"--assess-schedule", "off", "--retention-schedule", "off", "--rate-limit", "0")
	srv.waitReadyz(t, http.StatusOK, startTimeout)
	c := newClient(srv.base, secret)

	t.Run("ingest", func(t *testing.T) { outageDuringIngest(t, pg, srv, c, st, ref, f) })
	if t.Failed() {
		return
	}
	t.Run("assessment", func(t *testing.T) { outageDuringAssessment(t, pg, srv, c, st, ref) })
	if code := srv.terminate(t); code != 0 {
		t.Errorf("exit status %d after SIGTERM", code)
	}
}

// outageDuringIngest posts every reading of the fleet from several
// senders and stops the database once some batches are in.
func outageDuringIngest(t *testing.T, pg *pgCluster, srv *server, c *client, st, ref *store.Store, f fleet) {
	type job struct{ p, k0 int }
	work := make(chan job)
	var (
		acked, unavailable atomic.Int64
		wg                 sync.WaitGroup
		firstErr           sync.Once
	)
	fail := func(format string, args ...any) {
		firstErr.Do(func() { t.Errorf(format, args...) })
	}
	for range outageSenders {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for j := range work {
				rows := batch(f.tags[j.p], j.p, j.k0, outageBatchSize, outageStep)
				for attempt := 0; ; attempt++ {
					a, res, err := c.postReadings(context.Background(), rows)
					if err != nil {
						fail("position %d from %d: no answer (the server must stay up): %v", j.p, j.k0, err)
						return
					}
					if a.status == http.StatusServiceUnavailable {
						if why := checkUnavailable(a, "/api/v1/readings"); why != "" {
							fail("503 while the database is away: %s", why)
						}
						unavailable.Add(1)
						time.Sleep(outageBackoff)
						continue
					}
					if a.status != http.StatusOK {
						fail("position %d from %d: %d %s", j.p, j.k0, a.status, a.short())
						return
					}
					if res.Inserted+res.AlreadyPresent != outageBatchSize || len(res.Conflicts) != 0 || len(res.Rejected) != 0 {
						fail("position %d from %d answered %+v", j.p, j.k0, res)
					}
					if attempt == 0 && res.AlreadyPresent != 0 {
						fail("a first post found %d readings already present", res.AlreadyPresent)
					}
					acked.Add(1)
					break
				}
			}
		}()
	}
	total := 0
	go func() {
		defer close(work)
		for k0 := 0; k0 < outagePerDrive; k0 += outageBatchSize {
			for p := range f.tags {
				work <- job{p, k0}
			}
		}
	}()
	for k0 := 0; k0 < outagePerDrive; k0 += outageBatchSize {
		total += len(f.tags)
	}

	if !poll(startTimeout, 10*time.Millisecond, func() bool { return acked.Load() >= 10 }) {
		t.Fatalf("only %d batches acknowledged before the outage", acked.Load())
	}
	downAt := time.Now()
	pg.stop(t)
	checkDown(t, srv, c)
	if !poll(30*time.Second, 10*time.Millisecond, func() bool { return unavailable.Load() > 0 }) {
		t.Error("no sender was answered 503 while the database was away")
	}
	pg.start(t)
	srv.waitReadyz(t, http.StatusOK, startTimeout)
	t.Logf("database away for %v; %d posts answered 503", time.Since(downAt).Round(time.Millisecond), unavailable.Load())
	wg.Wait()
	if t.Failed() {
		return
	}
	if int(acked.Load()) != total {
		t.Fatalf("%d of %d batches acknowledged", acked.Load(), total)
	}

	// The same readings, written straight into the reference database.
	ctx := context.Background()
	for k0 := 0; k0 < outagePerDrive; k0 += outageBatchSize {
		var rows []store.Reading
		for p, tag := range f.tags {
			rows = append(rows, batch(tag, p, k0, outageBatchSize, outageStep)...)
		}
		if _, err := ref.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	want := int64(outageDrives * outagePerDrive)
	for name, s := range map[string]*store.Store{"disturbed": st, "reference": ref} {
		var n, distinct int64
		if err := s.SQL().QueryRowContext(ctx, `SELECT count(*), (SELECT count(*) FROM (SELECT DISTINCT drive_id, at FROM readings) AS k) FROM readings`).
			Scan(&n, &distinct); err != nil {
			t.Fatalf("count %s readings: %v", name, err)
		}
		if n != want || distinct != n {
			t.Fatalf("%s database holds %d readings (%d distinct drive and time), want %d", name, n, distinct, want)
		}
	}
}

// checkDown waits for /readyz to turn unready and checks the answers the
// server gives while the database is away.
func checkDown(t *testing.T, srv *server, c *client) {
	t.Helper()
	body := srv.waitReadyz(t, http.StatusServiceUnavailable, 30*time.Second)
	var p problem
	if err := json.Unmarshal(body, &p); err != nil || p.Status != http.StatusServiceUnavailable || p.Title != "Not Ready" || p.Detail == "" {
		t.Errorf("/readyz while the database is away: %s", body)
	}
	if a, err := c.do(context.Background(), http.MethodGet, "/healthz", "", nil); err != nil || a.status != http.StatusOK {
		t.Errorf("/healthz while the database is away: %v %d", err, a.status)
	}
	for _, path := range []string{"/api/v1/drives", "/api/v1/jobs"} {
		a, err := c.do(context.Background(), http.MethodGet, path, "", nil)
		if err != nil {
			t.Errorf("GET %s while the database is away: %v", path, err)
			continue
		}
		if why := checkUnavailable(a, path); why != "" {
			t.Errorf("GET %s while the database is away: %s", path, why)
		}
	}
}

// outageDuringAssessment starts an assessment, stops the database while it
// runs, starts it again, assesses until a run succeeds, and compares the
// results with an undisturbed assessment of the reference database.
func outageDuringAssessment(t *testing.T, pg *pgCluster, srv *server, c *client, st, ref *store.Store) {
	first := c.startRun(t, jobs.Assess)
	pg.stop(t)
	checkDown(t, srv, c)
	pg.start(t)
	srv.waitReadyz(t, http.StatusOK, startTimeout)
	run := c.waitRun(t, first.ID, 2*time.Minute)
	t.Logf("disturbed run %d: %s %q %q", run.ID, run.Status, run.Note, run.Error)
	if run.Status == store.JobSucceeded {
		t.Fatalf("the assessment finished before the database stopped (%s): raise outageDrives or outagePerDrive so it runs longer on this machine", run.Note)
	}
	if run.Status != store.JobFailed || run.Error != "the database is unavailable" {
		t.Errorf("run during the outage recorded as %s %q, want failed with the database unavailable", run.Status, run.Error)
	}
	second := c.startRun(t, jobs.Assess)
	run = c.waitRun(t, second.ID, 2*time.Minute)
	if run.Status != store.JobSucceeded {
		t.Fatalf("run after the outage: %s %q", run.Status, run.Error)
	}
	t.Logf("run after the outage: %s", run.Note)
	compareWithUndisturbed(t, st, ref)
}

// assessed is what an assessment left for one drive.
type assessed struct {
	row      store.Assessment
	state    store.DriveState
	findings []string
	assessed time.Time
}

// loadAssessed reads every drive's assessment, life ledgers, findings and
// watermark, by serial.
func loadAssessed(t *testing.T, st *store.Store) map[string]assessed {
	t.Helper()
	ctx := context.Background()
	db := st.DB(ctx)
	var drives []store.Drive
	if err := db.Find(&drives).Error; err != nil {
		t.Fatal(err)
	}
	serial := map[int64]string{}
	for _, d := range drives {
		serial[d.ID] = d.Serial
	}
	out := map[string]assessed{}
	var rows []store.Assessment
	if err := db.Find(&rows).Error; err != nil {
		t.Fatal(err)
	}
	for _, r := range rows {
		out[serial[r.DriveID]] = assessed{row: r}
	}
	// The states as the assessment loads them: the ledgers decoded, their
	// closed days gathered from their chunks.
	ids := make([]int64, 0, len(drives))
	for _, d := range drives {
		ids = append(ids, d.ID)
	}
	cs, err := st.LoadAssessContexts(ctx, ids, time.Now())
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range cs {
		if c.State == nil {
			continue
		}
		a := out[serial[c.Drive.ID]]
		a.state = *c.State
		out[serial[c.Drive.ID]] = a
	}
	var findings []store.Finding
	if err := db.Order("drive_id, rule").Find(&findings).Error; err != nil {
		t.Fatal(err)
	}
	for _, f := range findings {
		a := out[serial[f.DriveID]]
		a.findings = append(a.findings, fmt.Sprintf("%s %s %s %s", f.Rule, f.Severity, f.Status, f.Message))
		out[serial[f.DriveID]] = a
	}
	for id, sn := range serial {
		w, ok, err := st.Watermark(ctx, id)
		if err != nil {
			t.Fatal(err)
		}
		if ok {
			a := out[sn]
			a.assessed = w.AssessedTo
			out[sn] = a
		}
	}
	return out
}

// compareWithUndisturbed assesses the reference database, drive by drive
// at the time each drive was assessed in the disturbed one, and checks
// the results agree to 1e-9 relative.
func compareWithUndisturbed(t *testing.T, st, ref *store.Store) {
	t.Helper()
	got := loadAssessed(t, st)
	if len(got) != outageDrives {
		t.Fatalf("%d drives assessed, want %d", len(got), outageDrives)
	}
	var refDrives []store.Drive
	if err := ref.DB(context.Background()).Find(&refDrives).Error; err != nil {
		t.Fatal(err)
	}
	refID := map[string]int64{}
	for _, d := range refDrives {
		refID[d.Serial] = d.ID
	}
	// The assessment time enters the results (window checks, silence);
	// drives the disturbed run saved before the outage carry its time.
	byAt := map[time.Time][]int64{}
	for sn, a := range got {
		byAt[a.row.At] = append(byAt[a.row.At], refID[sn])
	}
	for at, ids := range byAt {
		a := jobs.NewAssessor(ref, jobs.AssessConfig{Now: func() time.Time { return at }})
		if _, err := a.Assess(context.Background(), jobs.AssessOptions{DriveIDs: ids}); err != nil {
			t.Fatalf("reference assessment at %v: %v", at, err)
		}
		t.Logf("%d drives assessed at %s", len(ids), at.Format(time.RFC3339))
	}
	want := loadAssessed(t, ref)
	aged := 0
	for sn, g := range got {
		w, ok := want[sn]
		if !ok {
			t.Errorf("%s: not assessed in the reference", sn)
			continue
		}
		compareAssessed(t, sn, g, w)
		if w.state.CapacitorState.Damage > 0 {
			aged++
		}
	}
	if aged == 0 {
		t.Error("no reference drive has capacitor damage: the ledgers were not read back, and the comparison of damage checks nothing")
	}
}

// compareAssessed checks one drive.
func compareAssessed(t *testing.T, sn string, g, w assessed) {
	t.Helper()
	nums := []struct {
		name string
		a, b *float64
	}{
		{"capacitor_life_used_fraction", &g.row.CapacitorLifeUsedFraction, &w.row.CapacitorLifeUsedFraction},
		{"capacitor_remaining_h", g.row.CapacitorRemainingH, w.row.CapacitorRemainingH},
		{"fan_life_used_fraction", &g.row.FanLifeUsedFraction, &w.row.FanLifeUsedFraction},
		{"fan_remaining_h", g.row.FanRemainingH, w.row.FanRemainingH},
		{"allowed_current_a", g.row.AllowedCurrentA, w.row.AllowedCurrentA},
		{"utilisation_fraction", g.row.UtilisationFraction, w.row.UtilisationFraction},
		{"risk_score", &g.row.RiskScore, &w.row.RiskScore},
		{"health_score", &g.row.HealthScore, &w.row.HealthScore},
		{"capacitor damage", &g.state.CapacitorState.Damage, &w.state.CapacitorState.Damage},
		{"fan damage", &g.state.FanState.Damage, &w.state.FanState.Damage},
	}
	for _, n := range nums {
		if (n.a == nil) != (n.b == nil) {
			t.Errorf("%s %s: %v against %v undisturbed", sn, n.name, n.a, n.b)
			continue
		}
		if n.a != nil && !close9(*n.a, *n.b) {
			t.Errorf("%s %s: %.12g against %.12g undisturbed", sn, n.name, *n.a, *n.b)
		}
	}
	if g.row.HealthBand != w.row.HealthBand || !sameTime(g.row.CapacitorEndOfLife, w.row.CapacitorEndOfLife) ||
		!sameTime(g.row.FanEndOfLife, w.row.FanEndOfLife) || !g.assessed.Equal(w.assessed) {
		t.Errorf("%s: band %s, end of life %v/%v, assessed to %v against %s, %v/%v, %v undisturbed", sn,
			g.row.HealthBand, g.row.CapacitorEndOfLife, g.row.FanEndOfLife, g.assessed,
			w.row.HealthBand, w.row.CapacitorEndOfLife, w.row.FanEndOfLife, w.assessed)
	}
	if fmt.Sprint(g.findings) != fmt.Sprint(w.findings) {
		t.Errorf("%s findings:\n%v\nundisturbed:\n%v", sn, g.findings, w.findings)
	}
}

// close9 reports whether a and b agree to 1e-9 relative (absolute near 0).
func close9(a, b float64) bool {
	return math.Abs(a-b) <= 1e-9*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}

func sameTime(a, b *time.Time) bool {
	if a == nil || b == nil {
		return a == b
	}
	return a.Equal(*b)
}
