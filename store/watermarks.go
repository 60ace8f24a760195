package store

import (
	"context"
	"fmt"
	"time"

	"gorm.io/gorm"
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
//   - an ingest can commit between the assessment's read of a drive's
//     readings and its save; so the assessment, in the transaction that
//     advances the watermark, counts the readings in the range it covered
//     and sets RecomputeFrom when the count differs from what it took in
//     (advanceWatermarks): no late reading is lost either way.
type Watermark struct {
	DriveID       int64      `json:"drive_id"`
	AssessedTo    time.Time  `json:"assessed_to"`
	RecomputeFrom *time.Time `json:"recompute_from"`
}

// Watermark returns a drive's watermark; ok is false when the assessment
// has not processed the drive yet.
func (s *Store) Watermark(ctx context.Context, driveID int64) (Watermark, bool, error) {
	var (
		to   dbTime
		from dbTime
	)
	err := s.sqlDB.QueryRowContext(ctx, s.rebind("SELECT assessed_to, recompute_from FROM drive_watermarks WHERE drive_id = ?"), driveID).
		Scan(&to, &from)
	if errNoRows(err) {
		return Watermark{}, false, nil
	}
	if err != nil {
		return Watermark{}, false, fmt.Errorf("watermark of drive %d: %w", driveID, translate(err))
	}
	w := Watermark{DriveID: driveID, AssessedTo: to.T}
	w.RecomputeFrom = from.ptr()
	return w, true, nil
}

// AdvanceWatermark records that the assessment has processed the drive's
// readings up to assessedTo, making the row when missing. It clears
// recompute_from only while it still holds handled, the value the run
// started from (nil when there was none): a mark an ingest set meanwhile
// stays for the next run.
func (s *Store) AdvanceWatermark(ctx context.Context, driveID int64, assessedTo time.Time, handled *time.Time) error {
	return s.advanceWatermarkTx(s.db.WithContext(ctx), driveID, assessedTo, handled)
}

// advanceWatermarkTx is AdvanceWatermark inside the caller's transaction.
func (s *Store) advanceWatermarkTx(tx *gorm.DB, driveID int64, assessedTo time.Time, handled *time.Time) error {
	var h any
	if handled != nil {
		h = s.timeArg(*handled)
	}
	cast := "?"
	if s.dialect == Postgres {
		cast = "CAST(? AS timestamptz)"
	}
	err := tx.Exec(`INSERT INTO drive_watermarks (drive_id, assessed_to, recompute_from) VALUES (?, ?, NULL)
		ON CONFLICT (drive_id) DO UPDATE SET assessed_to = excluded.assessed_to,
		recompute_from = CASE WHEN drive_watermarks.recompute_from IS NOT DISTINCT FROM `+cast+` THEN NULL
			ELSE drive_watermarks.recompute_from END`, driveID, s.timeArg(assessedTo), h).Error
	if err != nil {
		return fmt.Errorf("advance watermark of drive %d: %w", driveID, translate(err))
	}
	return nil
}
