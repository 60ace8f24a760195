package bench

import (
	"cmp"
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"slices"
	"strings"
	"time"

	vegeta "github.com/tsenart/vegeta/v12/lib"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/demo"
)

// Bounds of `kelvard bench load`: it only ever attacks its own child
// server on the loopback interface, and never for long or hard.
const (
	MaxLoadRate       = 5000
	MaxLoadDuration   = 10 * time.Minute
	MaxLoadWorkers    = 2000
	defaultLoadRate   = 500
	defaultLoadTime   = 60 * time.Second
	defaultLoadWarmup = 5 * time.Second
)

// Targets of the load benchmark: every read endpoint's 99th percentile
// under this, and no errors at all.
const TargetReadP99 = 50 * time.Millisecond

// LoadConfig sets up `kelvard bench load`. Zero values take the defaults.
type LoadConfig struct {
	// DatabaseURL is a postgres:// URL; the fleet goes into a scratch
	// schema of its database, dropped at the end.
	DatabaseURL string
	// Rate is the fixed request rate per second (default 500, at most
	// MaxLoadRate), held for Duration (default 60 s, at most
	// MaxLoadDuration) after a Warmup (default 5 s, negative for none)
	// that is not counted.
	Rate     int
	Duration time.Duration
	Warmup   time.Duration
	// Workers is how many request goroutines the attack starts with
	// (default 10); it adds more, up to MaxWorkers (default 256), while
	// all are busy.
	Workers, MaxWorkers int
	// Timeout is the longest a request may take (default 10 s).
	Timeout time.Duration
	// Seed picks the drives, filters and week windows (default 1).
	Seed uint64
	// Positions, when above zero, replaces the demo fleet with a small
	// registered fleet of this many positions and four weeks of hourly
	// readings: quick to load, for tests.
	Positions int
	// Executable is the kelvard binary run as the server (default: this
	// process's own executable).
	Executable string
	// Progress receives a line as each step starts (nil: discarded).
	Progress io.Writer
}

func (c *LoadConfig) defaults() error {
	if c.Rate == 0 {
		c.Rate = defaultLoadRate
	}
	if c.Duration == 0 {
		c.Duration = defaultLoadTime
	}
	if c.Warmup == 0 {
		c.Warmup = defaultLoadWarmup
	}
	if c.Workers == 0 {
		c.Workers = 10
	}
	if c.MaxWorkers == 0 {
		c.MaxWorkers = max(256, c.Workers)
	}
	if c.Timeout == 0 {
		c.Timeout = 10 * time.Second
	}
	if c.Seed == 0 {
		c.Seed = 1
	}
	if c.Progress == nil {
		c.Progress = io.Discard
	}
	if err := c.Check(); err != nil {
		return err
	}
	if !strings.HasPrefix(c.DatabaseURL, "postgres://") && !strings.HasPrefix(c.DatabaseURL, "postgresql://") {
		return errors.New("bench load needs a PostgreSQL database: give --database-url postgres://…")
	}
	return nil
}

// Check reports the first setting out of its range, for a configuration
// whose defaults are filled in (the command line's are).
func (c *LoadConfig) Check() error {
	switch {
	case c.Rate < 1 || c.Rate > MaxLoadRate:
		return fmt.Errorf("rate %d requests/s: want 1 to %d", c.Rate, MaxLoadRate)
	case c.Duration < time.Second || c.Duration > MaxLoadDuration:
		return fmt.Errorf("duration %s: want 1s to %s", c.Duration, MaxLoadDuration)
	case c.Warmup > time.Minute:
		return fmt.Errorf("warm-up %s: want at most 1m", c.Warmup)
	case c.Workers < 1 || c.MaxWorkers < c.Workers || c.MaxWorkers > MaxLoadWorkers:
		return fmt.Errorf("workers %d to %d: want 1 ≤ workers ≤ max workers ≤ %d", c.Workers, c.MaxWorkers, MaxLoadWorkers)
	case c.Timeout <= 0:
		return fmt.Errorf("timeout %s: want a positive duration", c.Timeout)
	case c.Positions < 0:
		return fmt.Errorf("positions %d: want 0 (the demo fleet) or more", c.Positions)
	}
	return nil
}

// EndpointStats are one endpoint's figures (or a group's: the reads, all).
type EndpointStats struct {
	Name string
	// Share is the endpoint's percentage of the mix.
	Share    int
	Requests int
	// P50, P99 and Max are latencies from the moment a worker took the
	// request to the end of reading the answer (vegeta's measure); P50 and
	// P99 are estimates from a t-digest.
	P50, P99, Max, Mean time.Duration
	// Errors counts transport failures, answers other than 200, and
	// reading posts whose answer did not insert every row.
	Errors int
	// StatusCodes counts answers by status ("0" is no answer).
	StatusCodes map[string]int
	// ErrorSamples holds up to three distinct error texts.
	ErrorSamples []string
}

// LoadReport is the outcome of Load.
type LoadReport struct {
	Machine Machine
	// LoadAverageEnd is the one-minute load average when the attack ended.
	LoadAverageEnd string
	// Fleet says which fleet was loaded; the counts describe it.
	Fleet                                    string
	Sites, Positions, Drives, Readings, Open int
	Setup                                    time.Duration
	Rate                                     int
	Duration, Warmup                         time.Duration
	Workers, MaxWorkers                      int
	Seed                                     uint64
	Endpoints                                []EndpointStats
	Reads, Overall                           EndpointStats
	// ReadsOverTarget counts reads slower than TargetReadP99.
	ReadsOverTarget int
	// Slice is the width of the slices of ReadP99BySlice: the attack cut
	// in six, or in 10-second slices when longer than a minute.
	Slice time.Duration
	// ReadP99BySlice is the reads' 99th percentile in each slice of the
	// attack, by when the requests started: a tail spread evenly over the
	// run, or bunched in a few slices (often other work on the machine).
	ReadP99BySlice []time.Duration
	// AchievedRate is requests sent per second over the attack.
	AchievedRate float64
	// Inserted counts readings the counted posts stored.
	Inserted int
	// CPU is the processor time of the attack: this process (the client),
	// the server and its PostgreSQL backends.
	CPU CPU
	// PeakRSS is the server's VmHWM (bytes).
	PeakRSS int64
}

// WorstRead returns the read endpoint with the highest 99th percentile.
func (r LoadReport) WorstRead() EndpointStats {
	var w EndpointStats
	for i, e := range r.Endpoints {
		if loadMix[i].read && e.P99 >= w.P99 {
			w = e
		}
	}
	return w
}

// TargetsMet reports whether every read endpoint's p99 is under
// TargetReadP99 and nothing failed.
func (r LoadReport) TargetsMet() bool {
	return r.WorstRead().P99 < TargetReadP99 && r.Overall.Errors == 0
}

// Print writes the report as a table with its verdict.
func (r LoadReport) Print(w io.Writer) {
	m := r.Machine
	fmt.Fprintf(w, "kelvard bench load: %s at %d requests/s after a %s warm-up (not counted), %d to %d workers, seed %d\n",
		r.Duration, r.Rate, r.Warmup, r.Workers, r.MaxWorkers, r.Seed)
	fmt.Fprintf(w, "fleet: %s: %d sites, %d positions, %d drives, %d readings, %d open findings (loaded, assessed and vacuumed in %s)\n",
		r.Fleet, r.Sites, r.Positions, r.Drives, r.Readings, r.Open, r.Setup.Round(100*time.Millisecond))
	fmt.Fprintf(w, "machine: %d CPUs, %s, %s, %s; load average %s at start, %s at the end\n\n",
		m.CPUs, m.CPUModel, m.GoVersion, m.PostgreSQL, m.LoadAverage, r.LoadAverageEnd)
	ms := func(d time.Duration) string { return fmt.Sprintf("%.1f", float64(d)/float64(time.Millisecond)) }
	fmt.Fprintf(w, "%-44s %5s %9s %8s %8s %8s %7s  %s\n", "endpoint", "share", "requests", "p50 ms", "p99 ms", "max ms", "errors", "status codes")
	row := func(e EndpointStats) {
		fmt.Fprintf(w, "%-44s %4d%% %9d %8s %8s %8s %7d  %s\n", e.Name, e.Share, e.Requests, ms(e.P50), ms(e.P99), ms(e.Max), e.Errors, codes(e.StatusCodes))
	}
	for _, e := range r.Endpoints {
		row(e)
	}
	fmt.Fprintln(w, strings.Repeat("-", 110))
	row(r.Reads)
	row(r.Overall)
	fmt.Fprintf(w, "\nachieved rate %.1f requests/s (asked %d); %d readings inserted by the counted posts\n", r.AchievedRate, r.Rate, r.Inserted)
	fmt.Fprintf(w, "reads slower than %s: %d of %d (%.2f %%); reads p99 by %s slice (ms):",
		TargetReadP99, r.ReadsOverTarget, r.Reads.Requests, 100*float64(r.ReadsOverTarget)/float64(max(r.Reads.Requests, 1)), r.Slice.Round(time.Millisecond))
	for _, p := range r.ReadP99BySlice {
		fmt.Fprintf(w, " %s", ms(p))
	}
	fmt.Fprintln(w)
	cpu := r.CPU
	perReq := func(d time.Duration) float64 { return d.Seconds() * 1000 / float64(max(r.Overall.Requests, 1)) }
	fmt.Fprintf(w, "CPU during the attack: client %.1f s, server %.1f s, PostgreSQL backends %.1f s, total %.1f s of %.0f s on %d CPUs\n",
		cpu.Client.Seconds(), cpu.Server.Seconds(), cpu.Database.Seconds(), cpu.Total().Seconds(), r.Duration.Seconds()*float64(m.CPUs), m.CPUs)
	fmt.Fprintf(w, "CPU per request: client %.2f ms, server %.2f ms, PostgreSQL %.2f ms; server peak RSS %.0f MB\n",
		perReq(cpu.Client), perReq(cpu.Server), perReq(cpu.Database), float64(r.PeakRSS)/(1<<20))
	for _, e := range r.Overall.ErrorSamples {
		fmt.Fprintf(w, "error: %s\n", e)
	}
	worst := r.WorstRead()
	fmt.Fprintf(w, "\nverdict: reads p99 %s ms at worst (%s), target under %s: %s; %d errors, target none: %s",
		ms(worst.P99), worst.Name, TargetReadP99, verdict(worst.P99 < TargetReadP99), r.Overall.Errors, verdict(r.Overall.Errors == 0))
	if r.AchievedRate < 0.95*float64(r.Rate) {
		fmt.Fprintf(w, "; the attack fell behind the asked rate, so requests queued in the client and the latencies understate the wait")
	}
	fmt.Fprintln(w)
}

// codes formats status counts as "200:1234 503:2", in code order.
func codes(m map[string]int) string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	// "0" (no answer) first, then the three-digit codes in order.
	slices.SortFunc(keys, func(a, b string) int { return cmp.Or(len(a)-len(b), strings.Compare(a, b)) })
	parts := make([]string, len(keys))
	for i, k := range keys {
		parts[i] = fmt.Sprintf("%s:%d", k, m[k])
	}
	return strings.Join(parts, " ")
}

// Load runs the load benchmark: a fleet in a scratch schema, assessed
// once, a `kelvard serve` child on the loopback interface, and a vegeta
// attack at a fixed rate with the request mix of loadMix.
func Load(ctx context.Context, cfg LoadConfig) (LoadReport, error) {
	if err := cfg.defaults(); err != nil {
		return LoadReport{}, err
	}
	if cfg.Warmup < 0 {
		cfg.Warmup = 0
	}
	if cfg.Executable == "" {
		exe, err := os.Executable()
		if err != nil {
			return LoadReport{}, fmt.Errorf("find the kelvard executable: %w", err)
		}
		cfg.Executable = exe
	}
	rep := LoadReport{Machine: thisMachine(), Rate: cfg.Rate, Duration: cfg.Duration, Warmup: cfg.Warmup,
		Workers: cfg.Workers, MaxWorkers: cfg.MaxWorkers, Seed: cfg.Seed}
	say := func(format string, args ...any) { fmt.Fprintf(cfg.Progress, format+"\n", args...) }

	sc, err := openScratch(ctx, cfg.DatabaseURL, "kelvard_bench", "load")
	if err != nil {
		return rep, err
	}
	defer sc.drop(say)
	admin, schema, dbURL := sc.admin, sc.schemas["load"], sc.urls["load"]
	if rep.Machine.PostgreSQL, err = postgresVersion(ctx, admin); err != nil {
		return rep, err
	}
	secret, err := store.NewSecret()
	if err != nil {
		return rep, err
	}

	// The fleet ends two hours before now: the posts then have that long
	// (and more as the run goes on) of fresh times to fill, and the first
	// assessment sees the fleet as it was when its readings ended.
	fleetNow := time.Now().UTC().Truncate(time.Hour).Add(-2 * time.Hour)
	start := time.Now()
	if err := loadFleet(ctx, cfg, dbURL, secret, fleetNow, say, &rep); err != nil {
		return rep, err
	}
	say("vacuuming and analysing the scratch schema")
	if err := vacuumSchema(ctx, admin, schema); err != nil {
		return rep, err
	}
	rep.Setup = time.Since(start)

	db, err := sql.Open("pgx", dbURL)
	if err != nil {
		return rep, fmt.Errorf("open the scratch schema: %w", err)
	}
	defer db.Close()
	tg, err := readTargets(ctx, db)
	if err != nil {
		return rep, err
	}
	rep.Sites, rep.Positions, rep.Drives, rep.Readings, rep.Open = tg.counts[0], tg.counts[1], tg.counts[2], tg.counts[3], tg.counts[4]
	db.Close()

	say("starting the server")
	srv, err := startServer(ctx, cfg.Executable, []string{
		"KELVARD_DATABASE_URL=" + dbURL,
		"KELVARD_LOG_LEVEL=warn",
		"KELVARD_LOG_FORMAT=text",
		// The bench token alone sends every request: no per-token limit,
		// and no scheduled assessment in the middle of the attack.
		"KELVARD_RATE_LIMIT=0",
		"KELVARD_SCHEDULER=off",
	})
	if err != nil {
		return rep, err
	}
	defer srv.stop()

	// Every post gets fresh (drive, time) keys between the fleet's last
	// reading and now, spaced so that twice the expected number of posts
	// (and a margin for short runs) fits.
	expected := float64(cfg.Rate) * (cfg.Duration + cfg.Warmup).Seconds() * float64(loadMix[postEndpoint].share) / 100
	gen, err := newTargeter(srv.base, secret, tg, cfg.Seed, time.Now(), int(2*expected)+50)
	if err != nil {
		return rep, err
	}
	client := &http.Client{Timeout: cfg.Timeout, Transport: &http.Transport{
		DialContext:         (&net.Dialer{Timeout: 5 * time.Second, KeepAlive: 30 * time.Second}).DialContext,
		MaxIdleConnsPerHost: cfg.MaxWorkers,
		DisableCompression:  true,
	}}
	defer client.CloseIdleConnections()
	attack := func(name string, du time.Duration) (*attackResults, error) {
		a := vegeta.NewAttacker(vegeta.Client(client), vegeta.Workers(uint64(cfg.Workers)), vegeta.MaxWorkers(uint64(cfg.MaxWorkers)))
		stop := context.AfterFunc(ctx, func() { a.Stop() })
		defer stop()
		res := newAttackResults(time.Now(), du)
		for r := range a.Attack(gen.target, vegeta.Rate{Freq: cfg.Rate, Per: time.Second}, du, name) {
			res.add(r)
		}
		res.close()
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		return res, nil
	}
	warmInserted := 0
	if cfg.Warmup > 0 {
		say("warming up for %s at %d requests/s (not counted)", cfg.Warmup, cfg.Rate)
		w, err := attack("warm-up", cfg.Warmup)
		if err != nil {
			return rep, err
		}
		if w.overall.Requests > 0 && w.errors == int(w.overall.Requests) {
			return rep, fmt.Errorf("every warm-up request failed, first: %s (server log: %s)", w.samples[0], srv.stderr)
		}
		warmInserted = w.inserted
		if w.errors > 0 {
			say("warm-up: %d of %d requests failed, first: %s", w.errors, w.overall.Requests, w.samples[0])
		}
	}
	meter := cpuMeter{db: admin, appName: schema, server: srv.cmd.Process.Pid}
	before, err := meter.snapshot(ctx)
	if err != nil {
		return rep, err
	}
	say("attacking for %s at %d requests/s", cfg.Duration, cfg.Rate)
	res, err := attack("load", cfg.Duration)
	if err != nil {
		return rep, err
	}
	after, err := meter.snapshot(ctx)
	if err != nil {
		return rep, err
	}
	rep.LoadAverageEnd = loadAverage()
	rep.CPU = after.since(before)
	if rep.PeakRSS, err = srv.peakRSS(); err != nil {
		return rep, err
	}
	if err := srv.stop(); err != nil {
		return rep, err
	}
	res.fill(&rep)

	// Every counted and warm-up post must have stored its rows, and
	// nothing else may have.
	var stored int
	if err := admin.QueryRowContext(ctx, "SELECT count(*) FROM "+schema+".readings WHERE at > $1", tg.lastReading).Scan(&stored); err != nil {
		return rep, fmt.Errorf("count the posted readings: %w", err)
	}
	if posted := warmInserted + res.inserted; stored != posted {
		return rep, fmt.Errorf("the posts were answered with %d readings inserted, but the table holds %d new ones", posted, stored)
	}
	return rep, nil
}

// loadFleet fills the scratch schema: the demo fleet (or a small
// registered one) ending at fleetNow, its first assessment, and the bench
// admin token.
func loadFleet(ctx context.Context, cfg LoadConfig, dbURL, secret string, fleetNow time.Time, say func(string, ...any), rep *LoadReport) error {
	clock := func() time.Time { return fleetNow }
	st, err := store.Open(ctx, dbURL, store.Options{Now: clock})
	if err != nil {
		return err
	}
	defer st.Close()
	if _, err := st.Migrate(ctx); err != nil {
		return err
	}
	if cfg.Positions == 0 {
		sc := demo.Generate(jobs.DemoSeed, fleetNow)
		rep.Fleet = fmt.Sprintf("demo fleet (seed %d) ending %s", jobs.DemoSeed, sc.Now.Format("2006-01-02 15:04Z"))
		say("loading the demo fleet (%d positions, %d drives, a year of hourly readings)", len(sc.Positions), len(sc.Drives))
		if err := sc.Load(ctx, st, nil); err != nil {
			return fmt.Errorf("load the demo fleet: %w", err)
		}
	} else {
		const days = 28
		tl := newTimeline(fleetNow.Add(time.Hour), cfg.Positions*days*24, cfg.Positions)
		rep.Fleet = fmt.Sprintf("registered fleet of %d positions with %d days of readings", cfg.Positions, days)
		say("registering %d positions with drives and %d readings", cfg.Positions, cfg.Positions*days*24)
		if err := st.EnsureReadingPartitions(ctx, tl.start, fleetNow); err != nil {
			return err
		}
		f, err := registerFleet(ctx, st, cfg.Positions, tl.start.Add(-24*time.Hour))
		if err != nil {
			return err
		}
		if err := loadReadings(ctx, st, tl, f.tags, 0, cfg.Positions*days*24); err != nil {
			return err
		}
	}
	say("running the first assessment")
	if _, err := jobs.NewAssessor(st, jobs.AssessConfig{Now: clock}).Assess(ctx, jobs.AssessOptions{}); err != nil {
		return fmt.Errorf("first assessment: %w", err)
	}
	if _, err := st.Bootstrap(ctx, secret); err != nil {
		return fmt.Errorf("bench token: %w", err)
	}
	return nil
}

// vacuumSchema vacuums and analyses every table of the schema (a
// partitioned table with its partitions), so the planner knows the fleet.
func vacuumSchema(ctx context.Context, db *sql.DB, schema string) error {
	rows, err := db.QueryContext(ctx, `SELECT quote_ident(n.nspname) || '.' || quote_ident(c.relname)
		FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
		WHERE n.nspname = $1 AND c.relkind IN ('r', 'p') AND NOT c.relispartition ORDER BY c.relname`, schema)
	if err != nil {
		return fmt.Errorf("list the scratch tables: %w", err)
	}
	var tables []string
	for rows.Next() {
		var t string
		if err := rows.Scan(&t); err != nil {
			rows.Close()
			return fmt.Errorf("list the scratch tables: %w", err)
		}
		tables = append(tables, t)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return fmt.Errorf("list the scratch tables: %w", err)
	}
	if len(tables) == 0 {
		return errors.New("the scratch schema holds no tables")
	}
	if _, err := db.ExecContext(ctx, "VACUUM (ANALYZE) "+strings.Join(tables, ", ")); err != nil {
		return fmt.Errorf("vacuum the scratch schema: %w", err)
	}
	return nil
}

// loadSlices cuts an attack of du into the report's time slices: six, or
// 10-second ones when it lasts longer than a minute.
func loadSlices(du time.Duration) (n int, width time.Duration) {
	if du > time.Minute {
		return int((du + 10*time.Second - 1) / (10 * time.Second)), 10 * time.Second
	}
	return 6, max(du/6, time.Nanosecond)
}

// attackResults gathers one attack's results by endpoint.
type attackResults struct {
	start      time.Time
	slice      time.Duration
	readSlices []vegeta.LatencyMetrics
	slowReads  int

	byEndpoint     []vegeta.Metrics
	errs           []int
	reads, overall vegeta.Metrics
	readErrs       int
	errors         int
	inserted       int
	samples        []string
	endpointSample [][]string
}

func newAttackResults(start time.Time, du time.Duration) *attackResults {
	n, slice := loadSlices(du)
	return &attackResults{start: start, slice: slice, readSlices: make([]vegeta.LatencyMetrics, n),
		byEndpoint: make([]vegeta.Metrics, len(loadMix)), errs: make([]int, len(loadMix)),
		endpointSample: make([][]string, len(loadMix))}
}

// add counts one result. A post must answer 200 with every row inserted;
// anything else is an error of its endpoint.
func (a *attackResults) add(r *vegeta.Result) {
	k := classify(r.Method, r.URL)
	if r.Error == "" && k == postEndpoint {
		var ans store.IngestResult
		switch err := json.Unmarshal(r.Body, &ans); {
		case err != nil:
			r.Error = fmt.Sprintf("unreadable ingest answer: %v", err)
		case ans.Inserted != postRows || ans.AlreadyPresent > 0 || len(ans.Conflicts) > 0 || len(ans.Rejected) > 0:
			r.Error = fmt.Sprintf("ingest not clean: %.300s", r.Body)
		default:
			a.inserted += ans.Inserted
		}
	}
	if r.Error == "" && r.Code != http.StatusOK {
		r.Error = fmt.Sprintf("status %d", r.Code)
	}
	r.Body = nil
	if k >= 0 {
		a.byEndpoint[k].Add(r)
	}
	a.overall.Add(r)
	if k < 0 || loadMix[k].read {
		a.reads.Add(r)
		// The last requests may start a little after the attack's end.
		i := min(max(0, int(r.Timestamp.Sub(a.start)/a.slice)), len(a.readSlices)-1)
		a.readSlices[i].Add(r.Latency)
		if r.Latency >= TargetReadP99 {
			a.slowReads++
		}
	}
	if r.Error == "" {
		return
	}
	a.errors++
	if k >= 0 {
		a.errs[k]++
		if loadMix[k].read {
			a.readErrs++
		}
		if len(a.endpointSample[k]) < 3 && !slices.Contains(a.endpointSample[k], r.Error) {
			a.endpointSample[k] = append(a.endpointSample[k], r.Error)
		}
	}
	if len(a.samples) < 5 && !slices.ContainsFunc(a.samples, func(s string) bool { return strings.HasSuffix(s, ": "+r.Error) }) {
		a.samples = append(a.samples, fmt.Sprintf("%s %s: %s", r.Method, r.URL, r.Error))
	}
}

func (a *attackResults) close() {
	for i := range a.byEndpoint {
		a.byEndpoint[i].Close()
	}
	a.reads.Close()
	a.overall.Close()
}

func stats(name string, share int, m *vegeta.Metrics, errs int, samples []string) EndpointStats {
	return EndpointStats{Name: name, Share: share, Requests: int(m.Requests), P50: m.Latencies.P50, P99: m.Latencies.P99,
		Max: m.Latencies.Max, Mean: m.Latencies.Mean, Errors: errs, StatusCodes: m.StatusCodes, ErrorSamples: samples}
}

// fill puts the figures into the report.
func (a *attackResults) fill(rep *LoadReport) {
	readShare := 0
	for k, e := range loadMix {
		rep.Endpoints = append(rep.Endpoints, stats(e.name, e.share, &a.byEndpoint[k], a.errs[k], a.endpointSample[k]))
		if e.read {
			readShare += e.share
		}
	}
	rep.Reads = stats("reads (every GET)", readShare, &a.reads, a.readErrs, nil)
	rep.Overall = stats("overall", 100, &a.overall, a.errors, a.samples)
	rep.AchievedRate = a.overall.Rate
	rep.ReadsOverTarget, rep.Slice = a.slowReads, a.slice
	for _, l := range a.readSlices {
		rep.ReadP99BySlice = append(rep.ReadP99BySlice, l.Quantile(0.99))
	}
	rep.Inserted = a.inserted
}
