// Package bench measures kelvard on the machine and database it runs on.
//
// Ingest (`kelvard bench ingest`) sends the same readings three ways, each
// into a fresh scratch schema of a PostgreSQL database so all three start
// equal: as CSV batches through the HTTP API of a real `kelvard serve`
// child process, as JSON batches through a second one, and straight into
// an identical readings table with pgx CopyFrom, the fastest a client can
// load PostgreSQL; between phases the table just written is vacuumed and
// flushed, so each starts with clean buffers. It reports the three rates,
// the two API rates as fractions of the COPY rate, and each server's peak
// resident memory and CPU time.
//
// Load (`kelvard bench load`) loads the demo fleet into a scratch schema,
// assesses it, and sends a fixed rate of mixed API requests (drive lists,
// drive health, findings, a week of readings, posts of new readings) to a
// `kelvard serve` child on the loopback interface with vegeta, reporting
// latency percentiles and errors per endpoint against its targets.
package bench

import (
	"bytes"
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"os"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/jackc/pgx/v5"
	_ "github.com/jackc/pgx/v5/stdlib" // database/sql driver "pgx" for the scratch schemas

	"kelvard/store"
)

// IngestConfig tunes Ingest. Zero values take the defaults.
type IngestConfig struct {
	// DatabaseURL is a postgres:// URL; the scratch schemas are made in
	// its database and dropped at the end.
	DatabaseURL string
	// Readings is how many readings each phase sends (default 1 000 000),
	// over Positions positions (default 500), in batches of BatchRows
	// (default 10 000) from Senders concurrent senders (default 3).
	Readings, Positions, BatchRows, Senders int
	// Rounds splits the run (default 1: CSV, then JSON, then COPY). With
	// more, each round sends its share of the batches through the three
	// paths in turn, forward in even rounds and backward in odd ones, and
	// each phase's time is the sum over the rounds, so a drift in other
	// load on the machine falls on all three alike. Between any two steps
	// the table just written is vacuumed and a checkpoint flushes it, out
	// of the timing, so every step starts with clean buffers.
	Rounds int
	// Executable is the kelvard binary to run as the server (default: this
	// process's own executable).
	Executable string
	// Progress receives a line as each step starts (nil: discarded).
	Progress io.Writer
}

// Targets on the reference machine (2 cores): the API within these
// fractions of raw COPY, and the server within this much memory.
const (
	TargetCSVRatio  = 0.8
	TargetJSONRatio = 0.6
	TargetPeakRSS   = 250 << 20
)

// Phase is one way of loading the readings.
type Phase struct {
	Name    string
	Rows    int
	Elapsed time.Duration
	// PeakRSS is the server's VmHWM (bytes); zero for COPY, which has no
	// server.
	PeakRSS int64
	// CPU is the processor time the phase used while it ran.
	CPU CPU
}

// CPUPerMillion is the phase's processor time per million readings.
func (p Phase) CPUPerMillion() time.Duration {
	return time.Duration(float64(p.CPU.Total()) * 1e6 / float64(p.Rows))
}

// RowsPerSecond is the phase's rate.
func (p Phase) RowsPerSecond() float64 { return float64(p.Rows) / p.Elapsed.Seconds() }

// IngestReport is the outcome of Ingest.
type IngestReport struct {
	Machine                                         Machine
	Readings, Positions, BatchRows, Senders, Rounds int
	CSV, JSON, Copy                                 Phase
}

// CSVRatio is the CSV rate as a fraction of the COPY rate.
func (r IngestReport) CSVRatio() float64 { return r.CSV.RowsPerSecond() / r.Copy.RowsPerSecond() }

// JSONRatio is the JSON rate as a fraction of the COPY rate.
func (r IngestReport) JSONRatio() float64 { return r.JSON.RowsPerSecond() / r.Copy.RowsPerSecond() }

// CSVCPURatio is the COPY phase's CPU per reading divided by the CSV
// phase's: the rate ratio a machine with nothing else to do would reach
// when the processors are the limit.
func (r IngestReport) CSVCPURatio() float64 {
	return r.Copy.CPUPerMillion().Seconds() / r.CSV.CPUPerMillion().Seconds()
}

// JSONCPURatio is CSVCPURatio for the JSON phase.
func (r IngestReport) JSONCPURatio() float64 {
	return r.Copy.CPUPerMillion().Seconds() / r.JSON.CPUPerMillion().Seconds()
}

// Print writes the report as a small table.
func (r IngestReport) Print(w io.Writer) {
	m := r.Machine
	fmt.Fprintf(w, "kelvard bench ingest: %d readings over %d positions, batches of %d rows, %d concurrent senders, %d rounds\n",
		r.Readings, r.Positions, r.BatchRows, r.Senders, r.Rounds)
	fmt.Fprintf(w, "machine: %d CPUs, %s, %s, load average %s at start\n\n", m.CPUs, m.CPUModel, m.GoVersion, m.LoadAverage)
	fmt.Fprintf(w, "%-10s %9s %8s %8s | %-36s %8s | %s\n", "", "", "", "", "CPU seconds per million readings", "", "")
	fmt.Fprintf(w, "%-10s %9s %8s %8s | %8s %8s %8s %8s %8s | %s\n",
		"phase", "rows/s", "seconds", "vs COPY", "client", "server", "database", "total", "vs COPY", "server peak RSS")
	for _, p := range []Phase{r.CSV, r.JSON, r.Copy} {
		per := func(d time.Duration) string { return fmt.Sprintf("%.2f", d.Seconds()*1e6/float64(p.Rows)) }
		rss := "-"
		if p.PeakRSS > 0 {
			rss = fmt.Sprintf("%.0f MB", float64(p.PeakRSS)/(1<<20))
		}
		fmt.Fprintf(w, "%-10s %9.0f %8.2f %8.2f | %8s %8s %8s %8s %8.2f | %s\n", p.Name, p.RowsPerSecond(), p.Elapsed.Seconds(),
			p.RowsPerSecond()/r.Copy.RowsPerSecond(), per(p.CPU.Client), per(p.CPU.Server), per(p.CPU.Database),
			per(p.CPU.Total()), r.Copy.CPUPerMillion().Seconds()/p.CPUPerMillion().Seconds(), rss)
	}
	peak := max(r.CSV.PeakRSS, r.JSON.PeakRSS)
	fmt.Fprintf(w, "\nrates:  CSV/COPY %.2f (target %.2f: %s); JSON/COPY %.2f (target %.2f: %s)\n",
		r.CSVRatio(), TargetCSVRatio, verdict(r.CSVRatio() >= TargetCSVRatio),
		r.JSONRatio(), TargetJSONRatio, verdict(r.JSONRatio() >= TargetJSONRatio))
	fmt.Fprintf(w, "CPU:    CSV %.2f and JSON %.2f of COPY's cost per reading (the rate ratios when the processors are the only limit)\n",
		r.CSVCPURatio(), r.JSONCPURatio())
	fmt.Fprintf(w, "memory: server peak RSS %.0f MB (target under %d MB: %s)\n", float64(peak)/(1<<20), TargetPeakRSS>>20, verdict(peak < TargetPeakRSS))
}

// Ingest runs the ingest benchmark.
func Ingest(ctx context.Context, cfg IngestConfig) (IngestReport, error) {
	if cfg.Readings <= 0 {
		cfg.Readings = 1000000
	}
	if cfg.Positions <= 0 {
		cfg.Positions = 500
	}
	if cfg.BatchRows <= 0 {
		cfg.BatchRows = 10000
	}
	if cfg.Senders <= 0 {
		cfg.Senders = 3
	}
	if cfg.Rounds <= 0 {
		cfg.Rounds = 1
	}
	if cfg.Progress == nil {
		cfg.Progress = io.Discard
	}
	if !strings.HasPrefix(cfg.DatabaseURL, "postgres://") && !strings.HasPrefix(cfg.DatabaseURL, "postgresql://") {
		return IngestReport{}, errors.New("bench ingest needs a PostgreSQL database: give --database-url postgres://…")
	}
	if cfg.Executable == "" {
		exe, err := os.Executable()
		if err != nil {
			return IngestReport{}, fmt.Errorf("find the kelvard executable: %w", err)
		}
		cfg.Executable = exe
	}
	rep := IngestReport{Machine: thisMachine(), Readings: cfg.Readings, Positions: cfg.Positions, BatchRows: cfg.BatchRows,
		Senders: cfg.Senders, Rounds: cfg.Rounds}
	say := func(format string, args ...any) { fmt.Fprintf(cfg.Progress, format+"\n", args...) }

	sc, err := openScratch(ctx, cfg.DatabaseURL, "kelvard_bench_ingest", "csv", "json", "copy")
	if err != nil {
		return rep, err
	}
	defer sc.drop(say)
	admin, sch, urls := sc.admin, sc.schemas, sc.urls

	tl := newTimeline(time.Now(), cfg.Readings, cfg.Positions)
	secret, err := store.NewSecret()
	if err != nil {
		return rep, err
	}
	var fl fleet
	for _, k := range []string{"csv", "json", "copy"} {
		say("preparing schema %s (%d positions with drives, partitions for %s to %s)", sch[k], cfg.Positions,
			tl.start.Format("2006-01-02"), tl.start.Add(time.Duration(tl.hours)*time.Hour).Format("2006-01-02"))
		f, err := prepareSchema(ctx, urls[k], tl, cfg.Positions, secret, k != "copy")
		if err != nil {
			return rep, fmt.Errorf("prepare %s: %w", sch[k], err)
		}
		if k == "csv" {
			fl = f
		}
	}
	batches := (cfg.Readings + cfg.BatchRows - 1) / cfg.BatchRows
	batch := func(k int) []store.Reading {
		lo, hi := k*cfg.BatchRows, min((k+1)*cfg.BatchRows, cfg.Readings)
		rows := make([]store.Reading, 0, hi-lo)
		for r := lo; r < hi; r++ {
			rows = append(rows, tl.reading(r, fl.tags))
		}
		return rows
	}
	settle := func(schema string) error {
		if _, err := admin.ExecContext(ctx, "VACUUM (ANALYZE) "+schema+".readings"); err != nil {
			return fmt.Errorf("vacuum %s: %w", schema, err)
		}
		if _, err := admin.ExecContext(ctx, "CHECKPOINT"); err != nil {
			say("checkpoint skipped: %v", err)
		}
		return nil
	}
	if err := settle(sch["copy"]); err != nil {
		return rep, err
	}

	say("starting the CSV and JSON servers")
	csvSrv, err := newHTTPPhase(ctx, cfg, urls["csv"], secret, "text/csv")
	if err != nil {
		return rep, fmt.Errorf("CSV server: %w", err)
	}
	defer csvSrv.srv.stop()
	jsonSrv, err := newHTTPPhase(ctx, cfg, urls["json"], secret, "application/json")
	if err != nil {
		return rep, fmt.Errorf("JSON server: %w", err)
	}
	defer jsonSrv.srv.stop()
	copier, err := newCopyPhase(ctx, cfg, urls["copy"])
	if err != nil {
		return rep, fmt.Errorf("COPY connections: %w", err)
	}
	defer copier.close()

	rounds := min(cfg.Rounds, batches)
	cols := append([]string{"position", "at"}, store.ReadingValueColumns()...)
	for r := range rounds {
		lo, hi := r*batches/rounds, (r+1)*batches/rounds
		say("round %d of %d: batches %d to %d", r+1, rounds, lo+1, hi)
		csvBodies, jsonBodies, copies := make([][]byte, 0, hi-lo), make([][]byte, 0, hi-lo), make([][]copyRow, 0, hi-lo)
		for k := lo; k < hi; k++ {
			rows := batch(k)
			var b bytes.Buffer
			if err := store.WriteReadingsCSV(&b, rows, cols); err != nil {
				return rep, err
			}
			csvBodies, jsonBodies = append(csvBodies, b.Bytes()), append(jsonBodies, jsonBody(rows))
			c := make([]copyRow, len(rows))
			for i := range rows {
				p := (k*cfg.BatchRows + i) % cfg.Positions
				c[i] = newCopyRow(&rows[i], fl.drives[p], fl.positions[p])
			}
			copies = append(copies, c)
		}
		steps := []struct {
			schema string
			server int
			phase  *Phase
			run    func() error
		}{
			{sch["csv"], csvSrv.srv.cmd.Process.Pid, &rep.CSV, func() error { return csvSrv.send(ctx, csvBodies, &rep.CSV) }},
			{sch["json"], jsonSrv.srv.cmd.Process.Pid, &rep.JSON, func() error { return jsonSrv.send(ctx, jsonBodies, &rep.JSON) }},
			{sch["copy"], 0, &rep.Copy, func() error { return copier.copy(ctx, copies, &rep.Copy) }},
		}
		if r%2 == 1 {
			slices.Reverse(steps)
		}
		for _, st := range steps {
			meter := cpuMeter{db: admin, appName: st.schema, server: st.server}
			before, err := meter.snapshot(ctx)
			if err != nil {
				return rep, err
			}
			if err := st.run(); err != nil {
				return rep, err
			}
			after, err := meter.snapshot(ctx)
			if err != nil {
				return rep, err
			}
			st.phase.CPU.add(after.since(before))
			if err := settle(st.schema); err != nil {
				return rep, err
			}
		}
	}
	for _, p := range []*httpPhase{csvSrv, jsonSrv} {
		if err := p.finish(); err != nil {
			return rep, err
		}
	}
	rep.CSV.PeakRSS, rep.JSON.PeakRSS = csvSrv.peakRSS, jsonSrv.peakRSS
	rep.CSV.Name, rep.JSON.Name, rep.Copy.Name = "HTTP CSV", "HTTP JSON", "pgx COPY"
	for k, want := range map[string]int{"csv": cfg.Readings, "json": cfg.Readings, "copy": cfg.Readings} {
		if err := checkCount(ctx, admin, sch[k], want); err != nil {
			return rep, err
		}
	}
	return rep, nil
}

// prepareSchema migrates a scratch schema, makes the readings partitions
// the run needs and, with withFleet, registers the fleet and the bootstrap
// token.
func prepareSchema(ctx context.Context, dbURL string, tl timeline, positions int, secret string, withFleet bool) (fleet, error) {
	st, err := store.Open(ctx, dbURL, store.Options{})
	if err != nil {
		return fleet{}, err
	}
	defer st.Close()
	if _, err := st.Migrate(ctx); err != nil {
		return fleet{}, err
	}
	if err := st.EnsureReadingPartitions(ctx, tl.start, tl.start.Add(time.Duration(tl.hours)*time.Hour)); err != nil {
		return fleet{}, err
	}
	if !withFleet {
		return fleet{}, nil
	}
	f, err := registerFleet(ctx, st, positions, tl.start.Add(-24*time.Hour))
	if err != nil {
		return fleet{}, err
	}
	if _, err := st.Bootstrap(ctx, secret); err != nil {
		return fleet{}, err
	}
	return f, nil
}

// httpPhase is a kelvard server taking one kind of body.
type httpPhase struct {
	srv     *server
	client  *http.Client
	secret  string
	media   string
	senders int
	peakRSS int64
}

// newHTTPPhase starts a server on the schema.
func newHTTPPhase(ctx context.Context, cfg IngestConfig, dbURL, secret, media string) (*httpPhase, error) {
	srv, err := startServer(ctx, cfg.Executable, []string{
		"KELVARD_DATABASE_URL=" + dbURL,
		"KELVARD_BOOTSTRAP_TOKEN=" + secret,
		"KELVARD_LOG_LEVEL=warn",
		"KELVARD_LOG_FORMAT=text",
		fmt.Sprintf("KELVARD_MAX_INGEST_ROWS=%d", cfg.BatchRows),
		fmt.Sprintf("KELVARD_MAX_INGEST_BYTES=%d", cfg.BatchRows*1024+(1<<20)),
	})
	if err != nil {
		return nil, err
	}
	return &httpPhase{srv: srv, secret: secret, media: media, senders: cfg.Senders,
		client: &http.Client{Timeout: 10 * time.Minute, Transport: &http.Transport{MaxIdleConnsPerHost: cfg.Senders, DisableCompression: true}}}, nil
}

// send posts the bodies to /api/v1/readings from cfg.Senders goroutines
// and adds the rows and time to ph.
func (h *httpPhase) send(ctx context.Context, bodies [][]byte, ph *Phase) error {
	post := func(ctx context.Context, body []byte) (int, error) {
		req, err := http.NewRequestWithContext(ctx, http.MethodPost, h.srv.base+"/api/v1/readings", bytes.NewReader(body))
		if err != nil {
			return 0, err
		}
		req.Header.Set("Content-Type", h.media)
		req.Header.Set("Authorization", "Bearer "+h.secret)
		resp, err := h.client.Do(req)
		if err != nil {
			return 0, err
		}
		defer resp.Body.Close()
		answer, err := io.ReadAll(resp.Body)
		if err != nil {
			return 0, err
		}
		if resp.StatusCode != http.StatusOK {
			return 0, fmt.Errorf("status %d: %.500s", resp.StatusCode, answer)
		}
		var res store.IngestResult
		if err := json.Unmarshal(answer, &res); err != nil {
			return 0, fmt.Errorf("answer %.200s: %w", answer, err)
		}
		if len(res.Rejected) > 0 || len(res.Conflicts) > 0 || res.AlreadyPresent > 0 {
			return 0, fmt.Errorf("batch not clean: %.500s", answer)
		}
		return res.Inserted, nil
	}
	start := time.Now()
	n, err := fanOut(ctx, h.senders, len(bodies),
		func(ctx context.Context, k int) (int, error) { return post(ctx, bodies[k]) })
	ph.Elapsed += time.Since(start)
	ph.Rows += n
	if err != nil {
		return fmt.Errorf("%s: %w (server log: %s)", h.media, err, h.srv.stderr)
	}
	return nil
}

// finish reads the server's peak memory and stops it.
func (h *httpPhase) finish() error {
	var err error
	if h.peakRSS, err = h.srv.peakRSS(); err != nil {
		return err
	}
	return h.srv.stop()
}

// fanOut runs do for items 0…n-1 on workers goroutines, summing the counts
// they return; the first error stops the rest.
func fanOut(ctx context.Context, workers, n int, do func(ctx context.Context, k int) (int, error)) (int, error) {
	ctx, cancel := context.WithCancelCause(ctx)
	defer cancel(nil)
	work := make(chan int)
	var (
		mu    sync.Mutex
		total int
		wg    sync.WaitGroup
	)
	for range workers {
		wg.Go(func() {
			for k := range work {
				c, err := do(ctx, k)
				if err != nil {
					cancel(fmt.Errorf("batch %d: %w", k+1, err))
					return
				}
				mu.Lock()
				total += c
				mu.Unlock()
			}
		})
	}
feed:
	for k := range n {
		select {
		case work <- k:
		case <-ctx.Done():
			break feed
		}
	}
	close(work)
	wg.Wait()
	if err := context.Cause(ctx); err != nil {
		return total, err
	}
	return total, nil
}

// copyRow is one reading as COPY sends it.
type copyRow struct {
	drive, position int64
	at              time.Time
	vals            [14]float64
	null            [14]bool
}

func newCopyRow(r *store.Reading, drive, position int64) copyRow {
	c := copyRow{drive: drive, position: position, at: r.At}
	for i, v := range []*float64{r.InternalAirC, r.AmbientC, r.HeatsinkC, r.CurrentA, r.PeakCurrentA, r.FrequencyHz, r.BusV,
		r.BusRippleV, r.RunHoursH, r.PowerOnHoursH, r.DriveCapacitorLifeUsedFraction, r.DriveFanLifeUsedFraction,
		r.CapacitanceUF, r.ESRMilliohm} {
		if v == nil {
			c.null[i] = true
		} else {
			c.vals[i] = *v
		}
	}
	return c
}

// copySource feeds copyRows to CopyFrom with pointers into them, so a row
// costs no allocation.
type copySource struct {
	rows []copyRow
	i    int
	vals [17]any
}

func (c *copySource) Next() bool { c.i++; return c.i <= len(c.rows) }

func (c *copySource) Values() ([]any, error) {
	r := &c.rows[c.i-1]
	c.vals[0], c.vals[1], c.vals[2] = &r.drive, &r.at, &r.position
	for j := range r.vals {
		if r.null[j] {
			c.vals[3+j] = nil
		} else {
			c.vals[3+j] = &r.vals[j]
		}
	}
	return c.vals[:], nil
}

func (c *copySource) Err() error { return nil }

// copyPhase loads batches into a schema's readings table with pgx
// CopyFrom, one transaction a batch, from cfg.Senders connections.
type copyPhase struct {
	conns   chan *pgx.Conn
	senders int
}

func newCopyPhase(ctx context.Context, cfg IngestConfig, dbURL string) (*copyPhase, error) {
	c := &copyPhase{conns: make(chan *pgx.Conn, cfg.Senders), senders: cfg.Senders}
	for range cfg.Senders {
		conn, err := pgx.Connect(ctx, dbURL)
		if err != nil {
			c.close()
			return nil, fmt.Errorf("connect: %w", err)
		}
		c.conns <- conn
	}
	return c, nil
}

func (c *copyPhase) copy(ctx context.Context, batches [][]copyRow, ph *Phase) error {
	cols := append([]string{"drive_id", "at", "position_id"}, store.ReadingValueColumns()...)
	start := time.Now()
	n, err := fanOut(ctx, c.senders, len(batches), func(ctx context.Context, k int) (int, error) {
		conn := <-c.conns
		defer func() { c.conns <- conn }()
		var n int64
		err := pgx.BeginFunc(ctx, conn, func(tx pgx.Tx) error {
			var err error
			n, err = tx.CopyFrom(ctx, pgx.Identifier{"readings"}, cols, &copySource{rows: batches[k]})
			return err
		})
		return int(n), err
	})
	ph.Elapsed += time.Since(start)
	ph.Rows += n
	if err != nil {
		return fmt.Errorf("COPY: %w", err)
	}
	return nil
}

func (c *copyPhase) close() {
	for {
		select {
		case conn := <-c.conns:
			conn.Close(context.Background())
		default:
			return
		}
	}
}

// checkCount makes sure the phase stored every reading.
func checkCount(ctx context.Context, db *sql.DB, schema string, want int) error {
	var n int
	if err := db.QueryRowContext(ctx, "SELECT count(*) FROM "+schema+".readings").Scan(&n); err != nil {
		return fmt.Errorf("count readings in %s: %w", schema, err)
	}
	if n != want {
		return fmt.Errorf("%s holds %d readings, want %d", schema, n, want)
	}
	return nil
}

// schemaURL returns the database URL with its search path set to schema.
func schemaURL(raw, schema string) (string, error) {
	u, err := url.Parse(raw)
	if err != nil {
		return "", fmt.Errorf("parse %s: %w", redact(raw), err)
	}
	q := u.Query()
	q.Set("search_path", schema)
	// The schema names the phase's connections too, so its database
	// backends can be found and their CPU time read.
	q.Set("application_name", schema)
	u.RawQuery = q.Encode()
	return u.String(), nil
}

// redact hides a password in a database URL.
func redact(raw string) string {
	u, err := url.Parse(raw)
	if err != nil || u.User == nil {
		return raw
	}
	return u.Redacted()
}
