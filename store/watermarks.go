package store

import (
	"context"
	"database/sql"
	"fmt"
	"time"
)

// Watermark is how far the assessment has processed a drive's readings.
//
// The contract between the ingest and the assessment:
//   - the assessment sets AssessedTo to the time of the last reading it has
//     processed and clears RecomputeFrom once it has recomputed from there
//     (AdvanceWatermark does both);
//   - the ingest, in the transaction that inserts readings, lowers
//     RecomputeFrom to the earliest new reading of every drive that
//     received one at or before its AssessedTo; readings after AssessedTo
//     are simply new and change nothing here;
//   - on PostgreSQL an assessment that must not miss a late reading locks
//     the drive's row (SELECT … FOR UPDATE, after inserting it when
//     missing) before it reads the readings, in the transaction that
//     advances the watermark: an ingest's update of the same row then waits
//     and re-checks against the new AssessedTo. On SQLite every write
//     transaction holds the database's write lock, which does the same.
type Watermark struct {
	DriveID       int64      `json:"drive_id"`
	AssessedTo    time.Time  `json:"assessed_to"`
	RecomputeFrom *time.Time `json:"recompute_from"`
}

// Watermark returns a drive's watermark; ok is false when the assessment
// has not processed the drive yet.
func (s *Store) Watermark(ctx context.Context, driveID int64) (Watermark, bool, error) {
	var (
		to   atValue
		from nullAt
	)
	err := s.sqlDB.QueryRowContext(ctx, s.rebind("SELECT assessed_to, recompute_from FROM drive_watermarks WHERE drive_id = ?"), driveID).
		Scan(&to, &from)
	if errNoRows(err) {
		return Watermark{}, false, nil
	}
	if err != nil {
		return Watermark{}, false, fmt.Errorf("watermark of drive %d: %w", driveID, translate(err))
	}
	w := Watermark{DriveID: driveID, AssessedTo: to.t}
	if from.valid {
		w.RecomputeFrom = &from.t
	}
	return w, true, nil
}

// AdvanceWatermark records that the assessment has processed the drive's
// readings up to assessedTo, making the row when missing. It clears
// recompute_from only while it still holds handled, the value the run
// started from (nil when there was none): a mark an ingest set meanwhile
// stays for the next run.
func (s *Store) AdvanceWatermark(ctx context.Context, driveID int64, assessedTo time.Time, handled *time.Time) error {
	var h any
	if handled != nil {
		h = s.atArg(*handled)
	}
	q := `INSERT INTO drive_watermarks (drive_id, assessed_to, recompute_from) VALUES (?, ?, NULL)
		ON CONFLICT (drive_id) DO UPDATE SET assessed_to = excluded.assessed_to,
		recompute_from = CASE WHEN drive_watermarks.recompute_from IS NOT DISTINCT FROM ? THEN NULL
			ELSE drive_watermarks.recompute_from END`
	if s.dialect == Postgres {
		q = `INSERT INTO drive_watermarks (drive_id, assessed_to, recompute_from) VALUES (?, ?, NULL)
		ON CONFLICT (drive_id) DO UPDATE SET assessed_to = excluded.assessed_to,
		recompute_from = CASE WHEN drive_watermarks.recompute_from IS NOT DISTINCT FROM ?::timestamptz THEN NULL
			ELSE drive_watermarks.recompute_from END`
	}
	if _, err := s.sqlDB.ExecContext(ctx, s.rebind(q), driveID, s.atArg(assessedTo), h); err != nil {
		return fmt.Errorf("advance watermark of drive %d: %w", driveID, translate(err))
	}
	return nil
}

// nullAt scans an optional reading time from either dialect.
type nullAt struct {
	t     time.Time
	valid bool
}

func (n *nullAt) Scan(v any) error {
	if v == nil {
		n.valid = false
		return nil
	}
	var a atValue
	if err := a.Scan(v); err != nil {
		return err
	}
	n.t, n.valid = a.t, true
	return nil
}

var _ sql.Scanner = (*nullAt)(nil)
