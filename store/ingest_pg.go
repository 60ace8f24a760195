package store

import (
	"context"
	"fmt"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/stdlib"
)

// The PostgreSQL ingest: the batch is checked and resolved in Go (plan),
// the months it needs get their partitions (outside the write transaction,
// because making a partition locks the whole readings table), and then one
// transaction on a pgx connection taken from the pool GORM holds:
//
//  1. COPY the rows into a temporary staging table (ON COMMIT DROP);
//  2. one statement: INSERT … SELECT from staging ON CONFLICT DO NOTHING
//     RETURNING the keys inserted, counted per drive, and the watermark
//     update of every drive whose earliest new reading lies at or before
//     its assessed_to;
//  3. only when some rows were not inserted: one query that joins staging
//     with readings and returns the stored rows whose values differ (the
//     conflicts); the rest were already present.

// readingColumnList is the column list of readings in table order.
var readingColumnList = "drive_id, at, position_id, " + strings.Join(readingValueNames[:], ", ")

// readingCopyColumns names the COPY columns in table order.
var readingCopyColumns = append([]string{"drive_id", "at", "position_id"}, readingValueNames[:]...)

const createStagingSQL = "CREATE TEMP TABLE readings_staging (LIKE readings) ON COMMIT DROP"

var insertFromStagingSQL = `WITH ins AS (
	INSERT INTO readings (` + readingColumnList + `)
	SELECT ` + readingColumnList + ` FROM readings_staging
	ON CONFLICT (drive_id, at) DO NOTHING
	RETURNING drive_id, at
), firsts AS (
	SELECT drive_id, min(at) AS first_at, count(*) AS n FROM ins GROUP BY drive_id
), marked AS (
	UPDATE drive_watermarks AS w SET recompute_from = LEAST(w.recompute_from, f.first_at)
	FROM firsts AS f
	WHERE w.drive_id = f.drive_id AND f.first_at <= w.assessed_to
	RETURNING w.drive_id
)
SELECT COALESCE((SELECT sum(n) FROM firsts), 0)::bigint, (SELECT count(*) FROM marked)`

// conflictsSQL returns the stored rows that share a key with a staged row
// but differ from it. $1 and $2 bound the batch's times so only the
// partitions it touches are read.
var conflictsSQL = func() string {
	var stored, staged []string
	for _, c := range append([]string{"position_id"}, readingValueNames[:]...) {
		stored = append(stored, "r."+c)
		staged = append(staged, "s."+c)
	}
	return `SELECT r.drive_id, r.at, ` + strings.Join(stored, ", ") + `
	FROM readings_staging AS s JOIN readings AS r ON r.drive_id = s.drive_id AND r.at = s.at
	WHERE r.at >= $1 AND r.at <= $2
	AND (` + strings.Join(stored, ", ") + `) IS DISTINCT FROM (` + strings.Join(staged, ", ") + `)`
}()

func (s *Store) ingestPostgres(ctx context.Context, rows []Reading, opts IngestOptions) (IngestResult, error) {
	p, err := s.plan(ctx, s.db.WithContext(ctx), rows, opts)
	if err != nil {
		return IngestResult{}, err
	}
	if err := p.refuse(opts); err != nil {
		return IngestResult{}, err
	}
	if len(p.good) == 0 {
		return p.result(0, nil, opts), nil
	}
	if err := s.ensureMonths(ctx, p.months); err != nil {
		return IngestResult{}, err
	}
	var (
		inserted  int
		conflicts []Conflict
	)
	for attempt := 0; attempt < 4; attempt++ {
		inserted, conflicts, err = s.writePostgres(ctx, p)
		if err == nil || !retryable(err) {
			break
		}
	}
	if err != nil {
		return IngestResult{}, translate(err)
	}
	return p.result(inserted, conflicts, opts), nil
}

// writePostgres runs the write transaction on a pgx connection from the
// pool.
func (s *Store) writePostgres(ctx context.Context, p *ingestPlan) (int, []Conflict, error) {
	conn, err := s.sqlDB.Conn(ctx)
	if err != nil {
		return 0, nil, fmt.Errorf("take a connection: %w", err)
	}
	defer conn.Close()
	var (
		inserted  int
		conflicts []Conflict
	)
	err = conn.Raw(func(driverConn any) error {
		sc, ok := driverConn.(*stdlib.Conn)
		if !ok {
			return fmt.Errorf("connection is %T, not pgx", driverConn)
		}
		return pgx.BeginFunc(ctx, sc.Conn(), func(tx pgx.Tx) error {
			// The staging table is new in every transaction, so its
			// statements are not kept as prepared statements.
			if _, err := tx.Exec(ctx, createStagingSQL, pgx.QueryExecModeExec); err != nil {
				return fmt.Errorf("create staging table: %w", err)
			}
			n, err := tx.CopyFrom(ctx, pgx.Identifier{"readings_staging"}, readingCopyColumns, &copySource{plan: p})
			if err != nil {
				return fmt.Errorf("copy into staging: %w", err)
			}
			if int(n) != len(p.good) {
				return fmt.Errorf("copy into staging: %d rows copied, %d sent", n, len(p.good))
			}
			var ins, marked int64
			if err := tx.QueryRow(ctx, insertFromStagingSQL, pgx.QueryExecModeExec).Scan(&ins, &marked); err != nil {
				return fmt.Errorf("insert from staging: %w", err)
			}
			inserted = int(ins)
			if inserted == len(p.good) {
				return nil
			}
			conflicts, err = p.pgConflicts(ctx, tx)
			return err
		})
	})
	return inserted, conflicts, err
}

// pgConflicts finds the staged rows whose key is stored with other values.
func (p *ingestPlan) pgConflicts(ctx context.Context, tx pgx.Tx) ([]Conflict, error) {
	// Without statistics the planner guesses the staging table's size and
	// may scan whole partitions; a quick ANALYZE lets it probe the primary
	// key instead.
	if _, err := tx.Exec(ctx, "ANALYZE readings_staging", pgx.QueryExecModeExec); err != nil {
		return nil, fmt.Errorf("analyze staging: %w", err)
	}
	lo, hi := p.good[0].at, p.good[0].at
	for _, g := range p.good {
		if g.at.Before(lo) {
			lo = g.at
		}
		if g.at.After(hi) {
			hi = g.at
		}
	}
	rows, err := tx.Query(ctx, conflictsSQL, pgx.QueryExecModeExec, lo, hi)
	if err != nil {
		return nil, fmt.Errorf("compare with stored readings: %w", err)
	}
	defer rows.Close()
	var out []Conflict
	for rows.Next() {
		var (
			stored   Reading
			driveID  int64
			at       time.Time
			position int64
		)
		dest := []any{&driveID, &at, &position}
		for _, slot := range stored.valueSlots() {
			dest = append(dest, slot)
		}
		if err := rows.Scan(dest...); err != nil {
			return nil, fmt.Errorf("read stored reading: %w", err)
		}
		if c, ok := p.conflict(readingKey{driveID, at.UnixMicro()}, &stored, position); ok {
			out = append(out, c)
		}
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("compare with stored readings: %w", err)
	}
	return out, nil
}

// copySource feeds a plan's good rows to CopyFrom without copying them:
// every value is a pointer into the plan or the caller's rows, and a nil
// measurement pointer is NULL.
type copySource struct {
	plan *ingestPlan
	i    int
	vals [3 + readingValueCount]any
}

func (c *copySource) Next() bool {
	c.i++
	return c.i <= len(c.plan.good)
}

func (c *copySource) Values() ([]any, error) {
	g := &c.plan.good[c.i-1]
	r := &c.plan.rows[g.idx]
	c.vals[0], c.vals[1], c.vals[2] = &g.driveID, &g.at, &g.positionID
	for j, v := range r.values() {
		if v == nil {
			c.vals[3+j] = nil
		} else {
			c.vals[3+j] = v
		}
	}
	return c.vals[:], nil
}

func (c *copySource) Err() error { return nil }
