package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"gorm.io/gorm"

	"kelvard/health"
)

// HourlyReading is one hour of a drive's readings after roll-up: the
// statistics pages and trends use, and the aggregate from which capacitor
// and fan life are recomputed once the raw rows are gone.
type HourlyReading struct {
	DriveID    int64
	Hour       time.Time
	PositionID int64
	Samples    int
	// Stats maps a reading field to its [min, mean, max] over the hour
	// (fields never logged in the hour are absent), plus
	// "current_ms_a2": [mean square of the output current].
	Stats map[string][]float64
	Agg   health.HourAggregate
}

// RollupMonth is one calendar month (UTC) of raw readings that may be
// rolled up.
type RollupMonth struct {
	Start, End time.Time
}

// RawMonths lists the UTC months that hold raw readings and end at or
// before cutoff, oldest first.
func (s *Store) RawMonths(ctx context.Context, cutoff time.Time) ([]RollupMonth, error) {
	var first dbTime
	if err := s.sqlDB.QueryRowContext(ctx, "SELECT min(at) FROM readings").Scan(&first); err != nil {
		return nil, fmt.Errorf("oldest reading: %w", translate(err))
	}
	if !first.Valid {
		return nil, nil
	}
	var out []RollupMonth
	m := time.Date(first.T.Year(), first.T.Month(), 1, 0, 0, 0, 0, time.UTC)
	for {
		next := m.AddDate(0, 1, 0)
		if next.After(cutoff) {
			return out, nil
		}
		var n int64
		if err := s.sqlDB.QueryRowContext(ctx, s.rebind("SELECT count(*) FROM (SELECT 1 FROM readings WHERE at >= ? AND at < ? LIMIT 1) x"),
			s.timeArg(m), s.timeArg(next)).Scan(&n); err != nil {
			return nil, fmt.Errorf("readings of %s: %w", m.Format("2006-01"), translate(err))
		}
		if n > 0 {
			out = append(out, RollupMonth{Start: m, End: next})
		}
		m = next
	}
}

// MonthAssessed reports whether every reading of the month has been taken
// in by the assessment (each at or before its drive's watermark, with no
// recompute pending from before the month's end): nothing is rolled up
// before it has been assessed. Readings of retired drives do not count.
func (s *Store) MonthAssessed(ctx context.Context, m RollupMonth) (bool, error) {
	var n int64
	// A retired drive is never assessed again (its findings resolve and its
	// assessment is dropped), so its readings wait for nothing.
	err := s.db.WithContext(ctx).Raw(`SELECT count(*) FROM readings r
		JOIN drives d ON d.id = r.drive_id
		LEFT JOIN drive_watermarks w ON w.drive_id = r.drive_id
		WHERE r.at >= ? AND r.at < ? AND d.status <> ?
		  AND (w.assessed_to IS NULL OR r.at > w.assessed_to OR (w.recompute_from IS NOT NULL AND w.recompute_from < ?))`,
		s.timeArg(m.Start), s.timeArg(m.End), health.StatusRetired, s.timeArg(m.End)).Scan(&n).Error
	if err != nil {
		return false, fmt.Errorf("check month %s assessed: %w", m.Start.Format("2006-01"), translate(err))
	}
	return n == 0, nil
}

// MonthDrives lists the drives with raw readings in the month and, for each,
// the time of its last reading or roll-up before the month (zero when
// none): the start of the month's first interval.
func (s *Store) MonthDrives(ctx context.Context, m RollupMonth) (map[int64]time.Time, error) {
	rows, err := s.db.WithContext(ctx).Raw(`SELECT d.drive_id,
			(SELECT max(r.at) FROM readings r WHERE r.drive_id = d.drive_id AND r.at < ?),
			(SELECT max(h.hour) FROM readings_hourly h WHERE h.drive_id = d.drive_id AND h.hour < ?)
		FROM (SELECT DISTINCT drive_id FROM readings WHERE at >= ? AND at < ?) d`,
		s.timeArg(m.Start), s.timeArg(m.Start), s.timeArg(m.Start), s.timeArg(m.End)).Rows()
	if err != nil {
		return nil, fmt.Errorf("drives of month %s: %w", m.Start.Format("2006-01"), translate(err))
	}
	defer rows.Close()
	out := map[int64]time.Time{}
	for rows.Next() {
		var id int64
		var raw, hour dbTime
		if err := rows.Scan(&id, &raw, &hour); err != nil {
			return nil, fmt.Errorf("scan drives of month: %w", err)
		}
		var prev time.Time
		if raw.Valid {
			prev = raw.T
		}
		if hour.Valid && hour.T.Add(time.Hour).After(prev) {
			// A rolled-up hour ends at most at the end of the hour.
			prev = hour.T.Add(time.Hour)
		}
		out[id] = prev
	}
	return out, rows.Err()
}

// SaveRollup stores a month's hourly roll-ups and removes its raw
// readings in one transaction: on PostgreSQL the month's partition is
// detached and dropped, on SQLite the rows are deleted.
func (s *Store) SaveRollup(ctx context.Context, m RollupMonth, hours []HourlyReading) error {
	return s.tx(ctx, func(tx *gorm.DB) error {
		for _, h := range hours {
			stats, err := SafeJSON(h.Stats)
			if err != nil {
				return fmt.Errorf("encode stats: %w", err)
			}
			agg, err := json.Marshal(h.Agg)
			if err != nil {
				return fmt.Errorf("encode aggregate: %w", err)
			}
			err = tx.Exec(`INSERT INTO readings_hourly (drive_id, hour, position_id, samples, stats, agg) VALUES (?, ?, ?, ?, ?, ?)
				ON CONFLICT (drive_id, hour) DO NOTHING`,
				h.DriveID, s.timeArg(h.Hour), h.PositionID, h.Samples, string(stats), string(agg)).Error
			if err != nil {
				return fmt.Errorf("insert roll-up of drive %d at %s: %w", h.DriveID, h.Hour.Format(time.RFC3339), translate(err))
			}
		}
		if s.dialect == Postgres {
			name := partitionName(monthOf(m.Start))
			var exists int64
			if err := tx.Raw("SELECT count(*) FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace WHERE c.relname = ? AND n.nspname = current_schema()", name).
				Scan(&exists).Error; err != nil {
				return fmt.Errorf("find partition %s: %w", name, translate(err))
			}
			if exists > 0 {
				if err := tx.Exec("ALTER TABLE readings DETACH PARTITION " + name).Error; err != nil {
					return fmt.Errorf("detach %s: %w", name, translate(err))
				}
				if err := tx.Exec("DROP TABLE " + name).Error; err != nil {
					return fmt.Errorf("drop %s: %w", name, translate(err))
				}
				s.ingest.parts.forget(monthOf(m.Start))
			}
		}
		// Rows in the default partition (or on SQLite) go row by row.
		if err := tx.Exec("DELETE FROM readings WHERE at >= ? AND at < ?", s.timeArg(m.Start), s.timeArg(m.End)).Error; err != nil {
			return fmt.Errorf("delete raw readings of %s: %w", m.Start.Format("2006-01"), translate(err))
		}
		return nil
	})
}

// ScanHourly streams the hourly roll-ups of several drives, each after its
// own time, ordered by drive and hour.
func (s *Store) ScanHourly(ctx context.Context, from []ScanFrom, fn func(h HourlyReading) error) error {
	for _, f := range from {
		rows, err := s.db.WithContext(ctx).Raw("SELECT drive_id, hour, position_id, samples, stats, agg FROM readings_hourly WHERE drive_id = ? AND hour > ? ORDER BY hour",
			f.DriveID, s.timeArg(f.After.Add(-time.Hour))).Rows()
		if err != nil {
			return fmt.Errorf("scan roll-ups of drive %d: %w", f.DriveID, translate(err))
		}
		err = func() error {
			defer rows.Close()
			for rows.Next() {
				var h HourlyReading
				var hour dbTime
				var stats, agg []byte
				if err := rows.Scan(&h.DriveID, &hour, &h.PositionID, &h.Samples, &stats, &agg); err != nil {
					return fmt.Errorf("scan roll-up: %w", err)
				}
				h.Hour = hour.T
				if err := json.Unmarshal(stats, &h.Stats); err != nil {
					return fmt.Errorf("decode roll-up stats: %w", err)
				}
				if err := json.Unmarshal(agg, &h.Agg); err != nil {
					return fmt.Errorf("decode roll-up: %w", err)
				}
				if err := fn(h); err != nil {
					return err
				}
			}
			return rows.Err()
		}()
		if err != nil {
			return err
		}
	}
	return nil
}
