package store

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"fmt"
	"strings"

	"gorm.io/gorm"
)

// The SQLite ingest runs in one immediate transaction (the write lock is
// taken at BEGIN, so concurrent batches wait their turn and the lookups and
// the writes see one state): multi-row
// INSERT … ON CONFLICT DO NOTHING RETURNING in chunks, a batched look at the
// stored rows of the keys that were not inserted, and the watermark update
// of every drive that received a reading at or before its assessed_to.

// sqliteInsertChunk is the number of rows in one INSERT. The SQLite driver
// finds each bound parameter by a linear search over the arguments, so a
// statement's cost grows with the square of its parameters: measured with
// BenchmarkIngest/sqlite on 10 000 rows, 8 rows a statement gave 38 000
// rows/s, 16 gave 41 000, 32 gave 36 000, 128 gave 29 000 and 500 only 8 500.
const sqliteInsertChunk = 16

// sqliteKeyChunk is the number of keys in one look-up of stored rows (two
// parameters each; kept small for the reason above).
const sqliteKeyChunk = 200

func (s *Store) ingestSQLite(ctx context.Context, rows []Reading, opts IngestOptions) (IngestResult, error) {
	var res IngestResult
	err := s.db.WithContext(ctx).Connection(func(conn *gorm.DB) error {
		// A new session on the one connection, so each query starts clean.
		db := conn.Session(&gorm.Session{NewDB: true})
		return immediateTx(ctx, db, func() error {
			p, err := s.plan(ctx, db, rows, opts)
			if err != nil {
				return err
			}
			if err := p.refuse(opts); err != nil {
				return err
			}
			if len(p.good) == 0 {
				res = p.result(0, nil, opts)
				return nil
			}
			inserted, conflicts, err := writeSQLite(ctx, db.Statement.ConnPool, p)
			if err != nil {
				return err
			}
			res = p.result(inserted, conflicts, opts)
			return nil
		})
	})
	return res, err
}

// immediateTx runs fn in a BEGIN IMMEDIATE transaction on the single
// connection db is bound to. The store's DSN asks for immediate
// transactions with _txlock, but glebarez/go-sqlite v1.21.2 stops reading
// its options after _time_format, so database/sql transactions begin
// DEFERRED: a batch that reads and then writes could then fail with
// SQLITE_BUSY when another writer went first, instead of waiting its turn.
func immediateTx(ctx context.Context, db *gorm.DB, fn func() error) error {
	conn := db.Statement.ConnPool
	if _, err := conn.ExecContext(ctx, "BEGIN IMMEDIATE"); err != nil {
		return fmt.Errorf("begin: %w", translate(err))
	}
	done := false
	defer func() {
		if done {
			return
		}
		if _, err := conn.ExecContext(context.WithoutCancel(ctx), "ROLLBACK"); err != nil {
			// The connection's state is unknown: make the pool drop it.
			if c, ok := conn.(*sql.Conn); ok {
				c.Raw(func(any) error { return driver.ErrBadConn })
			}
		}
	}()
	if err := fn(); err != nil {
		return err
	}
	if _, err := conn.ExecContext(ctx, "COMMIT"); err != nil {
		return fmt.Errorf("commit: %w", translate(err))
	}
	done = true
	return nil
}

// insertSQLiteSQL builds the INSERT for n rows.
func insertSQLiteSQL(n int) string {
	one := "(" + strings.TrimSuffix(strings.Repeat("?,", 3+readingValueCount), ",") + ")"
	var b strings.Builder
	b.WriteString("INSERT INTO readings (" + readingColumnList + ") VALUES ")
	for i := 0; i < n; i++ {
		if i > 0 {
			b.WriteByte(',')
		}
		b.WriteString(one)
	}
	b.WriteString(" ON CONFLICT (drive_id, at) DO NOTHING RETURNING drive_id, at")
	return b.String()
}

// f64 turns an optional measurement into a bound parameter.
func f64(v *float64) any {
	if v == nil {
		return nil
	}
	return *v
}

func writeSQLite(ctx context.Context, db gorm.ConnPool, p *ingestPlan) (int, []Conflict, error) {
	inserted := make([]bool, len(p.good))
	count := 0
	// firsts holds each drive's earliest inserted reading (Unix µs).
	firsts := map[int64]int64{}
	args := make([]any, 0, sqliteInsertChunk*(3+readingValueCount))
	full, err := db.PrepareContext(ctx, insertSQLiteSQL(sqliteInsertChunk))
	if err != nil {
		return 0, nil, fmt.Errorf("prepare insert: %w", err)
	}
	defer full.Close()
	for start := 0; start < len(p.good); start += sqliteInsertChunk {
		chunk := p.good[start:min(start+sqliteInsertChunk, len(p.good))]
		args = args[:0]
		for i := range chunk {
			g := &chunk[i]
			args = append(args, g.driveID, g.at.UnixMicro(), g.positionID)
			for _, v := range p.rows[g.idx].values() {
				args = append(args, f64(v))
			}
		}
		var rs *sql.Rows
		if len(chunk) == sqliteInsertChunk {
			rs, err = full.QueryContext(ctx, args...)
		} else {
			rs, err = db.QueryContext(ctx, insertSQLiteSQL(len(chunk)), args...)
		}
		if err == nil {
			err = scanInserted(rs, p, inserted, firsts, &count)
		}
		if err != nil {
			return 0, nil, fmt.Errorf("insert readings: %w", translate(err))
		}
	}

	for drive, first := range firsts {
		if _, err := db.ExecContext(ctx, `UPDATE drive_watermarks SET recompute_from = min(coalesce(recompute_from, ?), ?)
			WHERE drive_id = ? AND assessed_to >= ?`, first, first, drive, first); err != nil {
			return 0, nil, fmt.Errorf("mark drive %d for recomputation: %w", drive, translate(err))
		}
	}

	if count == len(p.good) {
		return count, nil, nil
	}
	var rest []readingKey
	for j, g := range p.good {
		if !inserted[j] {
			rest = append(rest, readingKey{g.driveID, g.at.UnixMicro()})
		}
	}
	conflicts, err := sqliteConflicts(ctx, db, p, rest)
	if err != nil {
		return 0, nil, err
	}
	return count, conflicts, nil
}

// scanInserted reads the keys an INSERT … RETURNING gave back and records
// each as inserted, with its drive's earliest new reading.
func scanInserted(rs *sql.Rows, p *ingestPlan, inserted []bool, firsts map[int64]int64, count *int) error {
	defer rs.Close()
	index := p.keyIndex()
	for rs.Next() {
		var k readingKey
		if err := rs.Scan(&k.drive, &k.at); err != nil {
			return err
		}
		j, ok := index[k]
		if !ok || inserted[j] {
			continue
		}
		inserted[j] = true
		*count++
		if f, seen := firsts[k.drive]; !seen || k.at < f {
			firsts[k.drive] = k.at
		}
	}
	return rs.Err()
}

// sqliteConflicts reads the stored rows of keys that were not inserted and
// reports those whose values differ.
func sqliteConflicts(ctx context.Context, db gorm.ConnPool, p *ingestPlan, keys []readingKey) ([]Conflict, error) {
	var out []Conflict
	for start := 0; start < len(keys); start += sqliteKeyChunk {
		chunk := keys[start:min(start+sqliteKeyChunk, len(keys))]
		args := make([]any, 0, 2*len(chunk))
		for _, k := range chunk {
			args = append(args, k.drive, k.at)
		}
		q := "SELECT " + readingColumnList + " FROM readings WHERE (drive_id, at) IN (VALUES " +
			strings.TrimSuffix(strings.Repeat("(?,?),", len(chunk)), ",") + ")"
		rows, err := db.QueryContext(ctx, q, args...)
		if err != nil {
			return nil, fmt.Errorf("compare with stored readings: %w", translate(err))
		}
		for rows.Next() {
			var (
				stored   Reading
				k        readingKey
				position int64
			)
			dest := []any{&k.drive, &k.at, &position}
			for _, slot := range stored.valueSlots() {
				dest = append(dest, slot)
			}
			if err := rows.Scan(dest...); err != nil {
				rows.Close()
				return nil, fmt.Errorf("read stored reading: %w", err)
			}
			if c, ok := p.conflict(k, &stored, position); ok {
				out = append(out, c)
			}
		}
		err = rows.Err()
		rows.Close()
		if err != nil {
			return nil, fmt.Errorf("compare with stored readings: %w", translate(err))
		}
	}
	return out, nil
}
