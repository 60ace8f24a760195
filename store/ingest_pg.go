package store

import (
	"context"
	"errors"
	"fmt"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/stdlib"
)

// The PostgreSQL ingest: the batch is checked and resolved in Go (plan),
// the months it needs get their partitions (outside the write transaction,
// because making a partition locks the whole readings table), and then one
// transaction on a pgx connection taken from the pool GORM holds:
//
//  1. one query finds the drives of the batch that already have a stored
//     reading between their first and last reading in the batch: only
//     their rows can meet a stored reading (a drive whose readings in the
//     batch all come after the latest this process stored for it is not
//     asked about; see highWater);
//  2. the rows of every other drive are COPYed straight into readings, and
//     one UPDATE lowers recompute_from of the drives among them that got a
//     reading at or before their assessed_to;
//  3. the rows of the overlapping drives are COPYed into a temporary
//     staging table (ON COMMIT DROP), then one statement inserts them with
//     INSERT … SELECT … ON CONFLICT DO NOTHING RETURNING, counts them and
//     updates the watermarks, and, when some were not inserted, one query
//     joins staging with readings and returns the stored rows that differ
//     (the conflicts); the rest were already present.
//
// Why two paths: on the reference machine a batch of 10 000 readings costs
// PostgreSQL 54 ms as a COPY into readings, but 24 ms as a COPY into staging
// plus 79 ms for the insert-select with its conflict check (speculative
// insertion row by row). A stream of new readings, the usual case, never
// overlaps what is stored, so it takes the direct path and runs near COPY
// speed; a replay or a late fill takes the staging path and gets its exact
// accounting. Should another transaction store one of the same readings
// between the overlap query and the direct COPY, the COPY fails on the
// primary key, the transaction rolls back and is tried again, and the
// overlap query then sends those rows through staging.

// readingColumnList is the column list of readings in table order.
var readingColumnList = "drive_id, at, position_id, " + strings.Join(readingValueNames[:], ", ")

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
	useHints := true
	for attempt := 0; attempt < 4; attempt++ {
		inserted, conflicts, err = s.writePostgres(ctx, p, useHints)
		if err == nil || !(retryable(err) || uniqueViolation(err)) {
			break
		}
		if uniqueViolation(err) {
			// A reading was stored meanwhile, or a hint was wrong: ask
			// the database about every drive from now on.
			s.ingest.high.forget(spans(p.good))
			useHints = false
		}
	}
	if err != nil {
		return IngestResult{}, translate(err)
	}
	s.ingest.high.record(spans(p.good))
	return p.result(inserted, conflicts, opts), nil
}

// indexProbesOnlySQL makes every lookup into readings in the write
// transaction a primary-key probe. Statistics of a young partition (a new
// month, a first load) say it is nearly empty, and the planner then hashes
// or scans the whole partition for every batch, which grows with the
// table: measured on a first load of a million readings, the overlap query
// went from 5 ms to seconds a batch. The options last until the
// transaction ends.
const indexProbesOnlySQL = "SET LOCAL enable_seqscan = off; SET LOCAL enable_hashjoin = off; SET LOCAL enable_mergejoin = off"

// overlapSQL returns the drives of a batch with a stored reading between
// their first and last reading in the batch.
const overlapSQL = `SELECT k.drive_id FROM unnest($1::bigint[], $2::timestamptz[], $3::timestamptz[]) AS k(drive_id, lo, hi)
	WHERE EXISTS (SELECT 1 FROM readings AS r WHERE r.drive_id = k.drive_id AND r.at >= k.lo AND r.at <= k.hi)`

// markDirectSQL lowers recompute_from for drives whose earliest new reading
// lies at or before their assessed_to.
const markDirectSQL = `UPDATE drive_watermarks AS w SET recompute_from = LEAST(w.recompute_from, f.first_at)
	FROM unnest($1::bigint[], $2::timestamptz[]) AS f(drive_id, first_at)
	WHERE w.drive_id = f.drive_id AND f.first_at <= w.assessed_to`

// driveSpan is the time span of one drive's rows in a batch.
type driveSpan struct {
	lo, hi time.Time
}

// spans returns each drive's first and last reading time in rows.
func spans(rows []plannedRow) map[int64]driveSpan {
	out := map[int64]driveSpan{}
	for i := range rows {
		g := &rows[i]
		sp, ok := out[g.driveID]
		if !ok {
			out[g.driveID] = driveSpan{g.at, g.at}
			continue
		}
		if g.at.Before(sp.lo) {
			sp.lo = g.at
		}
		if g.at.After(sp.hi) {
			sp.hi = g.at
		}
		out[g.driveID] = sp
	}
	return out
}

// writePostgres runs the write transaction on a pgx connection from the
// pool.
func (s *Store) writePostgres(ctx context.Context, p *ingestPlan, useHints bool) (int, []Conflict, error) {
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
			inserted, conflicts = 0, nil
			if _, err := tx.Exec(ctx, indexProbesOnlySQL, pgx.QueryExecModeSimpleProtocol); err != nil {
				return fmt.Errorf("set planner options: %w", err)
			}
			sp := spans(p.good)
			drives := make([]int64, 0, len(sp))
			los := make([]time.Time, 0, len(sp))
			his := make([]time.Time, 0, len(sp))
			for d, x := range sp {
				if useHints && s.ingest.high.clearAfter(d, x.lo) {
					continue
				}
				drives, los, his = append(drives, d), append(los, x.lo), append(his, x.hi)
			}
			var overlapping []int64
			if len(drives) > 0 {
				rows, err := tx.Query(ctx, overlapSQL, pgx.QueryExecModeExec, drives, los, his)
				if err != nil {
					return fmt.Errorf("look for stored readings in the batch's span: %w", err)
				}
				if overlapping, err = pgx.CollectRows(rows, pgx.RowTo[int64]); err != nil {
					return fmt.Errorf("look for stored readings in the batch's span: %w", err)
				}
			}
			direct, staged := p.good, []plannedRow(nil)
			if len(overlapping) > 0 {
				over := make(map[int64]bool, len(overlapping))
				for _, d := range overlapping {
					over[d] = true
				}
				direct = make([]plannedRow, 0, len(p.good))
				for _, g := range p.good {
					if over[g.driveID] {
						staged = append(staged, g)
					} else {
						direct = append(direct, g)
					}
				}
			}
			if len(direct) > 0 {
				n, err := copyRows(ctx, tx, "readings", p.rows, direct)
				if err != nil {
					return fmt.Errorf("copy into readings: %w", err)
				}
				inserted += int(n)
				firsts := sp
				if len(staged) > 0 {
					firsts = spans(direct)
				}
				ids := make([]int64, 0, len(firsts))
				ats := make([]time.Time, 0, len(firsts))
				for d, x := range firsts {
					ids, ats = append(ids, d), append(ats, x.lo)
				}
				if _, err := tx.Exec(ctx, markDirectSQL, pgx.QueryExecModeExec, ids, ats); err != nil {
					return fmt.Errorf("mark drives for recomputation: %w", err)
				}
			}
			if len(staged) == 0 {
				return nil
			}
			// The staging table is new in every transaction, so its
			// statements are not kept as prepared statements.
			if _, err := tx.Exec(ctx, createStagingSQL, pgx.QueryExecModeExec); err != nil {
				return fmt.Errorf("create staging table: %w", err)
			}
			n, err := copyRows(ctx, tx, "readings_staging", p.rows, staged)
			if err != nil {
				return fmt.Errorf("copy into staging: %w", err)
			}
			if int(n) != len(staged) {
				return fmt.Errorf("copy into staging: %d rows copied, %d sent", n, len(staged))
			}
			var ins, marked int64
			if err := tx.QueryRow(ctx, insertFromStagingSQL, pgx.QueryExecModeExec).Scan(&ins, &marked); err != nil {
				return fmt.Errorf("insert from staging: %w", err)
			}
			inserted += int(ins)
			if int(ins) == len(staged) {
				return nil
			}
			conflicts, err = p.pgConflicts(ctx, tx, staged)
			return err
		})
	})
	return inserted, conflicts, err
}

// pgConflicts finds the staged rows whose key is stored with other values.
func (p *ingestPlan) pgConflicts(ctx context.Context, tx pgx.Tx, staged []plannedRow) ([]Conflict, error) {
	lo, hi := staged[0].at, staged[0].at
	for _, g := range staged {
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

// uniqueViolation reports a primary-key clash: a direct COPY met a reading
// another transaction stored after the overlap query looked.
func uniqueViolation(err error) bool {
	var pgErr *pgconn.PgError
	return errors.As(err, &pgErr) && pgErr.Code == "23505"
}

// copyRows COPYs planned rows into table (readings or readings_staging)
// with pgx's CopyFrom on the transaction's connection, the rows encoded by
// copyEncoder.
func copyRows(ctx context.Context, tx pgx.Tx, table string, rows []Reading, good []plannedRow) (int64, error) {
	tag, err := tx.Conn().PgConn().CopyFrom(ctx, newCopyEncoder(rows, good),
		"COPY "+table+" ("+readingColumnList+") FROM STDIN (FORMAT binary)")
	return tag.RowsAffected(), err
}
