package store

import (
	"context"
	"database/sql"
	"encoding/base64"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"kelvard/health"
)

// Page sizes of Readings.
const (
	DefaultReadingsLimit = 1000
	MaxReadingsLimit     = 10000
)

// scanChunk is how many readings ScanSamples reads per query.
const scanChunk = 5000

// rebind turns ? placeholders into $n on PostgreSQL. The queries it is
// used on hold no ? inside literals.
func (s *Store) rebind(q string) string {
	if s.dialect != Postgres {
		return q
	}
	var b strings.Builder
	n := 0
	for i := 0; i < len(q); i++ {
		if q[i] == '?' {
			n++
			b.WriteString("$" + strconv.Itoa(n))
			continue
		}
		b.WriteByte(q[i])
	}
	return b.String()
}

// readingCursor is the decoded form of a readings page cursor: the time of
// the last reading given, in Unix microseconds.
type readingCursor struct {
	After int64 `json:"t"`
}

func encodeReadingCursor(at time.Time) string {
	b, _ := json.Marshal(readingCursor{After: at.UnixMicro()})
	return base64.RawURLEncoding.EncodeToString(b)
}

// Bounds of a readings cursor's time (Unix microseconds): a reading's time
// lies between EarliestTime and LatestTime. A cursor outside them was not
// issued here, and its time could not be passed to the database intact.
var (
	minCursorMicro = EarliestTime.UnixMicro()
	maxCursorMicro = LatestTime.UnixMicro()
)

func decodeReadingCursor(s string) (int64, bool, error) {
	if s == "" {
		return 0, false, nil
	}
	b, err := base64.RawURLEncoding.DecodeString(s)
	var c readingCursor
	if err != nil || len(b) > 64 || json.Unmarshal(b, &c) != nil || c.After < minCursorMicro || c.After > maxCursorMicro {
		return 0, false, Invalid("cursor", "is not a cursor this server issued")
	}
	return c.After, true, nil
}

// readingsWhere builds the condition on one drive's readings in [from, to)
// after the cursor; zero times leave that end open.
func (s *Store) readingsWhere(driveID int64, from, to time.Time, after int64, hasAfter bool) (string, []any) {
	where := []string{"r.drive_id = ?"}
	args := []any{driveID}
	if !from.IsZero() {
		where = append(where, "r.at >= ?")
		args = append(args, s.timeArg(from))
	}
	if !to.IsZero() {
		where = append(where, "r.at < ?")
		args = append(args, s.timeArg(to))
	}
	if hasAfter {
		where = append(where, "r.at > ?")
		args = append(args, s.timeArg(time.UnixMicro(after)))
	}
	return strings.Join(where, " AND "), args
}

// Readings returns one page of a drive's readings in [from, to), oldest
// first; zero times leave that end open. cursor is the Next of the page
// before. The drive must lie within the principal's sites.
func (s *Store) Readings(ctx context.Context, driveID int64, from, to time.Time, limit int, cursor string) (Page[Reading], error) {
	if limit <= 0 {
		limit = DefaultReadingsLimit
	}
	var fe fieldErrors
	if limit > MaxReadingsLimit {
		fe.add("limit", "must be at most %d", MaxReadingsLimit)
	}
	if !from.IsZero() && !to.IsZero() && !from.Before(to) {
		fe.add("to", "must lie after from")
	}
	after, hasAfter, err := decodeReadingCursor(cursor)
	if err != nil {
		return Page[Reading]{}, err
	}
	if err := fe.err(); err != nil {
		return Page[Reading]{}, err
	}
	if _, err := Get[Drive](ctx, s, driveID); err != nil {
		return Page[Reading]{}, err
	}
	where, args := s.readingsWhere(driveID, from, to, after, hasAfter)
	q := "SELECT r." + strings.ReplaceAll(readingColumnList, ", ", ", r.") + ", COALESCE(p.tag, '')" +
		" FROM readings AS r LEFT JOIN positions AS p ON p.id = r.position_id WHERE " + where +
		" ORDER BY r.at LIMIT " + strconv.Itoa(limit+1)
	rows, err := s.sqlDB.QueryContext(ctx, s.rebind(q), args...)
	if err != nil {
		return Page[Reading]{}, fmt.Errorf("read readings of drive %d: %w", driveID, translate(err))
	}
	defer rows.Close()
	items := make([]Reading, 0, min(limit+1, 1024))
	for rows.Next() {
		var (
			r  Reading
			at dbTime
		)
		dest := []any{&r.DriveID, &at, &r.PositionID}
		for _, slot := range r.valueSlots() {
			dest = append(dest, slot)
		}
		dest = append(dest, &r.Position)
		if err := rows.Scan(dest...); err != nil {
			return Page[Reading]{}, fmt.Errorf("read readings of drive %d: %w", driveID, err)
		}
		r.At = at.T
		items = append(items, r)
	}
	if err := rows.Err(); err != nil {
		return Page[Reading]{}, fmt.Errorf("read readings of drive %d: %w", driveID, translate(err))
	}
	page := Page[Reading]{Items: items}
	if len(items) > limit {
		page.Items = items[:limit]
		page.Next = encodeReadingCursor(page.Items[limit-1].At)
	}
	return page, nil
}

// ScanSamples calls fn with each of a drive's readings in [from, to) as a
// health.Sample (At in Unix seconds, NaN for what was not logged), oldest
// first, with the position it came from. It reads a few thousand rows at a
// time, so a drive's whole history never sits in memory. An error from fn
// stops the scan and is returned. A zero from or to leaves that end open.
// Under a site-limited principal the drive must lie within its sites.
func (s *Store) ScanSamples(ctx context.Context, driveID int64, from, to time.Time, fn func(positionID int64, s health.Sample) error) error {
	if !PrincipalFrom(ctx).AllSites() {
		if _, err := Get[Drive](ctx, s, driveID); err != nil {
			return err
		}
	}
	cols := "r.drive_id, r.at, r.position_id, r.internal_air_c, r.ambient_c, r.heatsink_c, r.current_a, r.peak_current_a, " +
		"r.frequency_hz, r.bus_v, r.bus_ripple_v, r.capacitance_uf, r.esr_milliohm"
	var (
		after    int64
		hasAfter bool
		vals     [10]sql.NullFloat64
		dest     = make([]any, 0, 13)
		id, pos  int64
		at       dbTime
	)
	dest = append(dest, &id, &at, &pos)
	for i := range vals {
		dest = append(dest, &vals[i])
	}
	for {
		where, args := s.readingsWhere(driveID, from, to, after, hasAfter)
		q := "SELECT " + cols + " FROM readings AS r WHERE " + where + " ORDER BY r.at LIMIT " + strconv.Itoa(scanChunk)
		n, err := func() (int, error) {
			rows, err := s.sqlDB.QueryContext(ctx, s.rebind(q), args...)
			if err != nil {
				return 0, translate(err)
			}
			defer rows.Close()
			n := 0
			for rows.Next() {
				if err := rows.Scan(dest...); err != nil {
					return n, err
				}
				n++
				after, hasAfter = at.T.UnixMicro(), true
				v := func(i int) float64 {
					if vals[i].Valid {
						return vals[i].Float64
					}
					return math.NaN()
				}
				smp := health.Sample{At: at.T.Unix(), InternalAirC: v(0), AmbientC: v(1), HeatsinkC: v(2), CurrentA: v(3),
					PeakCurrentA: v(4), FrequencyHz: v(5), BusV: v(6), BusRippleV: v(7), CapacitanceUF: v(8), ESRMilliohm: v(9)}
				if err := fn(pos, smp); err != nil {
					return n, &stopScan{err}
				}
			}
			return n, translate(rows.Err())
		}()
		if stop, ok := err.(*stopScan); ok {
			return stop.err
		}
		if err != nil {
			return fmt.Errorf("scan readings of drive %d: %w", driveID, err)
		}
		if n < scanChunk {
			return nil
		}
	}
}

// stopScan carries the callback's own error out of ScanSamples unwrapped.
type stopScan struct{ err error }

func (e *stopScan) Error() string { return e.err.Error() }
