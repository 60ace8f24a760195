package bench

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"io"
	"math"
	"net/http"
	"os"
	"slices"
	"strings"
	"time"

	"kelvard/jobs"
	"kelvard/store"
)

// AssessConfig sets up `kelvard bench assess`.
type AssessConfig struct {
	// DatabaseURL is the PostgreSQL server the run uses (scratch schemas,
	// dropped at the end).
	DatabaseURL string
	// Drives and ReadingsPerDrive size the fleet (default 1000 × 5000
	// hourly readings).
	Drives, ReadingsPerDrive int
	// NewFraction is the share of new readings the incremental run takes
	// in (default 0.01).
	NewFraction float64
	// ScrapeDrives is the fleet size of the /metrics scrape (default
	// 10 000).
	ScrapeDrives int
	// Progress receives a line per step; nil discards them.
	Progress io.Writer
	// Executable is the kelvard binary started for the scrape (default:
	// this process's own).
	Executable string
}

// AssessReport holds the figures of one run.
type AssessReport struct {
	Machine  Machine
	Drives   int
	Readings int
	Full     time.Duration
	// Baseline is the faster of BaselinePlanned (PostgreSQL's own plan
	// for the baseline query) and BaselineSorted (the same query with
	// index scans off).
	Baseline, BaselinePlanned, BaselineSorted time.Duration
	Floor                                     time.Duration
	NewReadings                               int
	// PartialDrives got the same share of new readings again, alone, and
	// Partial is the run that took them in.
	PartialDrives int
	Partial       time.Duration
	Incremental   time.Duration
	// Daily is a run of the daily window checks of every drive, with no
	// new readings: the part of a day's runs the incremental one leaves
	// out.
	Daily            time.Duration
	ScrapeDrives     int
	Scrape           time.Duration
	ScrapeSeriesSize int
}

// FullRatio is the full assessment's time over the baseline query's
// (target at most 1.0).
func (r AssessReport) FullRatio() float64 { return r.Full.Seconds() / r.Baseline.Seconds() }

// FloorRatio is the full assessment's time over the floor's: a binary COPY
// of the same rows and columns out of PostgreSQL, with nothing computed.
func (r AssessReport) FloorRatio() float64 { return r.Full.Seconds() / r.Floor.Seconds() }

// IncrementalRatio is the incremental run's time over the full one's
// (target at most 0.05).
func (r AssessReport) IncrementalRatio() float64 { return r.Incremental.Seconds() / r.Full.Seconds() }

// Print writes the report.
func (r AssessReport) Print(w io.Writer) {
	fmt.Fprintf(w, "machine: %d CPUs, %s, %s, load average %s at start\n", r.Machine.CPUs, r.Machine.CPUModel, r.Machine.GoVersion, r.Machine.LoadAverage)
	fmt.Fprintf(w, "fleet: %d drives × %d hourly readings = %d readings (PostgreSQL)\n", r.Drives, r.Readings/max(r.Drives, 1), r.Readings)
	fmt.Fprintf(w, "full assessment     %10s\n", r.Full.Round(time.Millisecond))
	fmt.Fprintf(w, "baseline SQL pass   %10s   ratio full/baseline %.2f (target ≤ 1.0; the faster of PostgreSQL's plan %s and a sort %s)\n",
		r.Baseline.Round(time.Millisecond), r.FullRatio(), r.BaselinePlanned.Round(time.Millisecond), r.BaselineSorted.Round(time.Millisecond))
	fmt.Fprintf(w, "floor: COPY out     %10s   ratio full/floor %.2f (the rows and columns the full run reads, nothing computed)\n", r.Floor.Round(time.Millisecond), r.FloorRatio())
	fmt.Fprintf(w, "incremental (+%d)   %10s   ratio incremental/full %.3f (target ≤ 0.05)\n", r.NewReadings, r.Incremental.Round(time.Millisecond), r.IncrementalRatio())
	fmt.Fprintf(w, "daily window checks %9s   ratio to full %.3f (once a day per drive: the trailing %d days of readings re-read, not in the runs above)\n",
		r.Daily.Round(time.Millisecond), r.Daily.Seconds()/r.Full.Seconds(), jobs.DefaultWindowDays)
	fmt.Fprintf(w, "incremental, %d drives %8s   ratio to the every-drive run %.3f (a run costs in proportion to the drives with new readings)\n",
		r.PartialDrives, r.Partial.Round(time.Millisecond), r.Partial.Seconds()/r.Incremental.Seconds())
	fmt.Fprintf(w, "/metrics scrape     %10s   with %d drives registered, %d bytes (target < 250 ms)\n", r.Scrape.Round(time.Millisecond), r.ScrapeDrives, r.ScrapeSeriesSize)
}

// baselineQuery is one window-function pass over the same readings that
// computes the capacitor integral of a 5000 h / 105 °C part without
// ripple (life halves for every 10 °C hotter: the capacitor makers'
// 10-degree rule, summed by the Palmgren–Miner rule, as health's
// capacitor model cites them), the yardstick the full assessment is
// measured against. It runs as written and every row is read: wrapped in
// an outer count(*), PostgreSQL drops the unused sum and with it the
// temperature column, and times a pass over the primary key alone.
const baselineQuery = `SELECT drive_id, sum(dt_h / (l0_h * power(2, (t0_c - core_c) / 10.0)))
	FROM (SELECT r.drive_id, r.internal_air_c AS core_c,
	             date_part('epoch', r.at - lag(r.at) OVER (PARTITION BY r.drive_id ORDER BY r.at)) / 3600.0 AS dt_h,
	             5000.0 AS l0_h, 105.0 AS t0_c
	      FROM readings r) x
	WHERE dt_h IS NOT NULL GROUP BY drive_id`

// runBaseline runs baselineQuery once, with PostgreSQL's chosen plan or
// with index scans off (a sort of the table read in stored order), and
// checks that it summed a positive, finite life fraction for each of the
// drives.
func runBaseline(ctx context.Context, db *sql.DB, drives int, sorted bool) error {
	sums, err := baselineSums(ctx, db, sorted)
	if err != nil {
		return err
	}
	for id, sum := range sums {
		if !(sum > 0) || math.IsInf(sum, 0) {
			return fmt.Errorf("baseline query: drive %d summed %v", id, sum)
		}
	}
	if len(sums) != drives {
		return fmt.Errorf("baseline query: %d drives summed, want %d", len(sums), drives)
	}
	return nil
}

// baselineSums runs baselineQuery and returns each drive's life fraction.
func baselineSums(ctx context.Context, db *sql.DB, sorted bool) (map[int64]float64, error) {
	tx, err := db.BeginTx(ctx, &sql.TxOptions{ReadOnly: true})
	if err != nil {
		return nil, fmt.Errorf("baseline query: %w", err)
	}
	defer tx.Rollback()
	if sorted {
		if _, err := tx.ExecContext(ctx, "SET LOCAL enable_indexscan = off"); err != nil {
			return nil, fmt.Errorf("baseline query: %w", err)
		}
	}
	rows, err := tx.QueryContext(ctx, baselineQuery)
	if err != nil {
		return nil, fmt.Errorf("baseline query: %w", err)
	}
	defer rows.Close()
	sums := map[int64]float64{}
	for rows.Next() {
		var id int64
		var sum float64
		if err := rows.Scan(&id, &sum); err != nil {
			return nil, fmt.Errorf("baseline query: %w", err)
		}
		sums[id] = sum
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("baseline query: %w", err)
	}
	return sums, nil
}

// Assess measures the assessment on PostgreSQL: a full assessment of the
// fleet against the baseline query over the same rows, an incremental run
// after a small share of new readings against the full one, and a /metrics
// scrape with a large fleet registered.
func Assess(ctx context.Context, cfg AssessConfig) (AssessReport, error) {
	if cfg.Drives <= 0 {
		cfg.Drives = 1000
	}
	if cfg.ReadingsPerDrive <= 0 {
		cfg.ReadingsPerDrive = 5000
	}
	if cfg.NewFraction <= 0 {
		cfg.NewFraction = 0.01
	}
	if cfg.ScrapeDrives <= 0 {
		cfg.ScrapeDrives = 10000
	}
	if cfg.Progress == nil {
		cfg.Progress = io.Discard
	}
	if cfg.Executable == "" {
		exe, err := os.Executable()
		if err != nil {
			return AssessReport{}, fmt.Errorf("find the kelvard executable: %w", err)
		}
		cfg.Executable = exe
	}
	if !strings.HasPrefix(cfg.DatabaseURL, "postgres://") && !strings.HasPrefix(cfg.DatabaseURL, "postgresql://") {
		return AssessReport{}, errors.New("bench assess needs a PostgreSQL database: give --database-url postgres://…")
	}
	say := func(format string, args ...any) { fmt.Fprintf(cfg.Progress, format+"\n", args...) }
	rep := AssessReport{Machine: thisMachine(), Drives: cfg.Drives}

	sc, err := openScratch(ctx, cfg.DatabaseURL, "kelvard_bench", "assess")
	if err != nil {
		return rep, err
	}
	defer sc.drop(say)
	admin, schema, dbURL := sc.admin, sc.schemas["assess"], sc.urls["assess"]
	now := time.Now().UTC().Truncate(time.Hour)
	clock := now
	st, err := store.Open(ctx, dbURL, store.Options{Now: func() time.Time { return clock }})
	if err != nil {
		return rep, err
	}
	defer st.Close()
	if _, err := st.Migrate(ctx); err != nil {
		return rep, err
	}

	// The fleet and its readings: ReadingsPerDrive hourly readings per
	// drive, ending a little before now so the new share fits after them
	// twice (every drive, then a tenth of them). Each run comes a minute
	// after the newest reading, as the scheduler finds a fleet that
	// reports: with the clock days ahead of the readings instead, every
	// drive carried a silent-position finding whose evidence changed
	// every run.
	newPer := max(1, int(float64(cfg.ReadingsPerDrive)*cfg.NewFraction))
	tl := newTimeline(now.Add(-time.Duration(2*newPer+1)*time.Hour), cfg.Drives*cfg.ReadingsPerDrive, cfg.Drives)
	clock = tl.last().Add(time.Minute)
	if err := st.EnsureReadingPartitions(ctx, tl.start, now); err != nil {
		return rep, err
	}
	say("registering %d drives", cfg.Drives)
	f, err := registerFleet(ctx, st, cfg.Drives, tl.start.Add(-24*time.Hour))
	if err != nil {
		return rep, err
	}
	say("loading %d readings", cfg.Drives*cfg.ReadingsPerDrive)
	if err := loadReadings(ctx, st, tl, f.tags, 0, cfg.Drives*cfg.ReadingsPerDrive); err != nil {
		return rep, err
	}
	rep.Readings = cfg.Drives * cfg.ReadingsPerDrive
	// Vacuumed and analysed before anything is timed, as autovacuum would
	// leave a table in service: otherwise autovacuum takes the new rows
	// while the full run or the baseline is timed, and either may pay.
	if _, err := admin.ExecContext(ctx, "VACUUM (ANALYZE) "+schema+".readings"); err != nil {
		return rep, fmt.Errorf("vacuum: %w", err)
	}

	as := jobs.NewAssessor(st, jobs.AssessConfig{Now: func() time.Time { return clock }})
	say("full assessment")
	start := time.Now()
	if _, err := as.Assess(ctx, jobs.AssessOptions{Full: true}); err != nil {
		return rep, err
	}
	rep.Full = time.Since(start)

	say("baseline query")
	conn, err := sql.Open("pgx", dbURL)
	if err != nil {
		return rep, err
	}
	defer conn.Close()
	// The baseline is the faster of PostgreSQL's own plan and a sort of
	// the table read in stored order: the smaller yardstick.
	for _, sorted := range []bool{false, true} {
		d, err := medianOf3(func() error { return runBaseline(ctx, conn, cfg.Drives, sorted) })
		if err != nil {
			return rep, err
		}
		if sorted {
			rep.BaselineSorted = d
		} else {
			rep.BaselinePlanned = d
		}
	}
	rep.Baseline = min(rep.BaselinePlanned, rep.BaselineSorted)
	// The floor: the same rows and columns copied out (the window-only
	// fields of older readings as NULL, as the full run reads them),
	// nothing computed.
	if rep.Floor, err = medianOf3(func() error {
		_, err := st.CopyReadings(ctx, io.Discard, clock.AddDate(0, 0, -jobs.DefaultWindowDays))
		return err
	}); err != nil {
		return rep, err
	}

	say("incremental assessment after %d new readings per drive", newPer)
	tl2 := tl
	tl2.hours += newPer
	clock = tl2.last().Add(time.Minute)
	if err := loadReadings(ctx, st, tl2, f.tags, rep.Readings, rep.Readings+newPer*cfg.Drives); err != nil {
		return rep, err
	}
	rep.NewReadings = newPer * cfg.Drives
	// The window checks (duty, DC bus, heatsink, data quality over the
	// trailing window) run once a day per drive, whenever a run finds
	// the drive's last pass a day old, and a drive with no new readings is
	// reassessed hourly; the new readings span more than a day, so the
	// runs that take them in leave both out (they take in new readings
	// only) and the daily pass is timed on its own below.
	const never = 10 * 365 * 24 * time.Hour
	inc := jobs.NewAssessor(st, jobs.AssessConfig{Now: func() time.Time { return clock }, TrendEvery: never, ReassessEvery: never})
	start = time.Now()
	if _, err := inc.Assess(ctx, jobs.AssessOptions{}); err != nil {
		return rep, err
	}
	rep.Incremental = time.Since(start)

	say("daily window checks of every drive")
	daily := jobs.NewAssessor(st, jobs.AssessConfig{Now: func() time.Time { return clock }, TrendEvery: time.Nanosecond, ReassessEvery: never})
	start = time.Now()
	sum, err := daily.Assess(ctx, jobs.AssessOptions{DriveIDs: f.drives})
	if err != nil {
		return rep, err
	}
	rep.Daily = time.Since(start)
	if sum.Drives != int64(cfg.Drives) {
		return rep, fmt.Errorf("the daily window checks assessed %d drives, want %d", sum.Drives, cfg.Drives)
	}

	// The same share again on a tenth of the drives: the run should cost
	// about a tenth, as it works per drive with new readings.
	rep.PartialDrives = max(1, cfg.Drives/10)
	say("incremental assessment after %d new readings on %d drives", newPer, rep.PartialDrives)
	var partial []store.Reading
	tl3 := tl2
	tl3.hours += newPer
	clock = tl3.last().Add(time.Minute)
	for h := tl2.hours; h < tl3.hours; h++ {
		for p := range rep.PartialDrives {
			partial = append(partial, tl3.reading(h*cfg.Drives+p, f.tags))
		}
	}
	if _, err := st.Ingest(ctx, partial, store.IngestOptions{}); err != nil {
		return rep, fmt.Errorf("load readings: %w", err)
	}
	start = time.Now()
	sum, err = inc.Assess(ctx, jobs.AssessOptions{})
	if err != nil {
		return rep, err
	}
	rep.Partial = time.Since(start)
	if sum.Drives != int64(rep.PartialDrives) {
		return rep, fmt.Errorf("the run after new readings on %d drives assessed %d", rep.PartialDrives, sum.Drives)
	}

	if cfg.ScrapeDrives > cfg.Drives {
		say("registering %d more drives for the /metrics scrape", cfg.ScrapeDrives-cfg.Drives)
		if err := bulkFleet(ctx, conn, cfg.ScrapeDrives-cfg.Drives, tl.start); err != nil {
			return rep, err
		}
		clock = clock.Add(2 * time.Hour) // every drive is due again
		if _, err := as.Assess(ctx, jobs.AssessOptions{}); err != nil {
			return rep, err
		}
	}
	rep.ScrapeDrives = max(cfg.ScrapeDrives, cfg.Drives)
	// The scrape goes to the real server, as a process of its own.
	srv, err := startServer(ctx, cfg.Executable, []string{"KELVARD_DATABASE_URL=" + dbURL, "KELVARD_SCHEDULER=off", "KELVARD_LOG_LEVEL=warn"})
	if err != nil {
		return rep, err
	}
	defer srv.stop()
	var times []time.Duration
	client := &http.Client{Timeout: time.Minute}
	for range 6 {
		start = time.Now()
		resp, err := client.Get(srv.base + "/metrics")
		if err != nil {
			return rep, fmt.Errorf("scrape /metrics: %w", err)
		}
		body, err := io.ReadAll(resp.Body)
		resp.Body.Close()
		if err != nil || resp.StatusCode != http.StatusOK {
			return rep, fmt.Errorf("/metrics answered %d: %v", resp.StatusCode, err)
		}
		times = append(times, time.Since(start))
		rep.ScrapeSeriesSize = len(body)
	}
	times = times[1:] // the first scrape warms the connection pool
	slices.Sort(times)
	rep.Scrape = times[len(times)/2]
	return rep, nil
}

// loadReadings ingests readings [from, to) of the timeline through the
// store's bulk ingest, in batches.
func loadReadings(ctx context.Context, st *store.Store, tl timeline, tags []string, from, to int) error {
	const batch = 50000
	rows := make([]store.Reading, 0, batch)
	for r := from; r < to; r++ {
		rows = append(rows, tl.reading(r, tags))
		if len(rows) == batch || r == to-1 {
			if _, err := st.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
				return fmt.Errorf("load readings: %w", err)
			}
			rows = rows[:0]
		}
	}
	return nil
}

// bulkFleet registers n more positions with a drive each, straight in SQL
// (the register's own writes would take minutes for ten thousand units and
// are not what is measured): one site, area and model, positions, drives,
// their components and installations.
func bulkFleet(ctx context.Context, db *sql.DB, n int, installedAt time.Time) error {
	stmts := []string{
		`INSERT INTO sites (name, elevation_m, time_zone, ambient_min_c, ambient_max_c, parameters, created_at, updated_at)
		 VALUES ('Scrape works', 40, 'UTC', -5, 38, '{}', now(), now())`,
		`INSERT INTO areas (site_id, name, env_location, env_sun, env_ambient_min_c, env_ambient_max_c, env_water, env_dust, env_oil,
		   env_condensation, env_salt_air, env_corrosion, env_hazardous_classified, parameters, created_at, updated_at)
		 SELECT id, 'Scrape hall', 'indoor', 'none', 5, 35, 'none', 'none', 'none', false, false, 'G1', false, '{}', now(), now()
		 FROM sites WHERE name = 'Scrape works'`,
		`INSERT INTO positions (site_id, area_id, tag, mounting, supply_voltage_v, supply_phases, supply_frequency_hz, carrier_khz,
		   duty, criticality, created_at, updated_at)
		 SELECT a.site_id, a.id, 'SP-' || lpad(g::text, 5, '0'), 'own_enclosure', 480, 3, 50, 4, 'normal', 'B', now(), now()
		 FROM areas a, generate_series(1, $1) g WHERE a.name = 'Scrape hall'`,
		`INSERT INTO drives (serial, model_id, site_id, status, position_id, manufactured_at, created_at, updated_at)
		 SELECT 'SCRAPE-' || lpad(substr(p.tag, 4), 5, '0'), (SELECT min(id) FROM drive_models), p.site_id, 'installed', p.id,
		   $1::timestamptz - interval '1 year', now(), now()
		 FROM positions p WHERE p.tag LIKE 'SP-%'`,
		`INSERT INTO installations (drive_id, position_id, installed_at, created_at, updated_at)
		 SELECT d.id, d.position_id, $1::timestamptz, now(), now() FROM drives d WHERE d.serial LIKE 'SCRAPE-%'`,
		`INSERT INTO components (drive_id, kind, installed_at, created_at, updated_at)
		 SELECT d.id, k, d.manufactured_at, now(), now() FROM drives d, unnest(ARRAY['dc_bus_capacitors', 'cooling_fan']) k
		 WHERE d.serial LIKE 'SCRAPE-%'`,
	}
	for i, q := range stmts {
		var args []any
		switch i {
		case 2:
			args = []any{n}
		case 3, 4:
			args = []any{installedAt}
		}
		if _, err := db.ExecContext(ctx, q, args...); err != nil {
			return fmt.Errorf("register the scrape fleet (step %d): %w", i+1, err)
		}
	}
	return nil
}

// medianOf3 times fn three times and returns the median.
func medianOf3(fn func() error) (time.Duration, error) {
	var times [3]time.Duration
	for i := range times {
		start := time.Now()
		if err := fn(); err != nil {
			return 0, err
		}
		times[i] = time.Since(start)
	}
	slices.Sort(times[:])
	return times[1], nil
}
