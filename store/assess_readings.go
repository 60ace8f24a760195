package store

import (
	"cmp"
	"context"
	"database/sql"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
	"github.com/jackc/pgx/v5/stdlib"
	"gorm.io/gorm"

	"kelvard/health"
)

// The readings table keeps `at` as timestamptz on PostgreSQL and as
// integer Unix microseconds on SQLite (see migrations 00002); so do the
// watermarks. timeArg and dbTime bridge the two.

// timeArg returns t in the form the readings and watermark columns take.
func (s *Store) timeArg(t time.Time) any {
	if s.dialect == SQLite {
		return t.UnixMicro()
	}
	return t.UTC()
}

// dbTime scans a readings-table time from either dialect.
type dbTime struct {
	T     time.Time
	Valid bool
}

// Scan implements sql.Scanner.
func (d *dbTime) Scan(v any) error {
	switch x := v.(type) {
	case nil:
		d.Valid = false
	case time.Time:
		d.T, d.Valid = x.UTC(), true
	case int64:
		d.T, d.Valid = time.UnixMicro(x).UTC(), true
	default:
		return fmt.Errorf("scan time from %T", v)
	}
	return nil
}

func (d dbTime) ptr() *time.Time {
	if !d.Valid {
		return nil
	}
	t := d.T
	return &t
}

// watermark is a row of drive_watermarks with the drive's newest reading.
type watermark struct {
	DriveID       int64
	AssessedTo    *time.Time
	RecomputeFrom *time.Time
	Latest        *time.Time
}

// loadWatermarks reads the watermarks of a batch of drives and each
// drive's newest reading time. The newest reading is looked for after the
// watermark first, which PostgreSQL prunes to the partitions from the
// watermark on (a probe of every partition's index cost a tenth of an
// incremental run); only a drive with nothing after its watermark, or
// with none, is probed across all of them.
func (s *Store) loadWatermarks(ctx context.Context, db *gorm.DB, ids []int64) ([]watermark, error) {
	rows, err := db.WithContext(ctx).Raw(`SELECT d.id, w.assessed_to, w.recompute_from,
		coalesce((SELECT max(r.at) FROM readings r WHERE r.drive_id = d.id AND r.at > w.assessed_to),
			(SELECT max(r.at) FROM readings r WHERE r.drive_id = d.id))
		FROM drives d LEFT JOIN drive_watermarks w ON w.drive_id = d.id WHERE d.id IN ?`, uniq(ids)).Rows()
	if err != nil {
		return nil, fmt.Errorf("load watermarks: %w", translate(err))
	}
	defer rows.Close()
	var out []watermark
	for rows.Next() {
		var w watermark
		var a, r, l dbTime
		if err := rows.Scan(&w.DriveID, &a, &r, &l); err != nil {
			return nil, fmt.Errorf("scan watermark: %w", err)
		}
		w.AssessedTo, w.RecomputeFrom, w.Latest = a.ptr(), r.ptr(), l.ptr()
		out = append(out, w)
	}
	return out, rows.Err()
}

// ScanFrom asks for one drive's readings after a time.
type ScanFrom struct {
	DriveID int64
	// After is exclusive: readings with at > After.
	After time.Time
	// Before, when set, is exclusive too: readings with at < Before.
	Before time.Time
	// Whole says the span is the drive's whole history (a full
	// recompute), and Expect about how many readings it holds (0:
	// unknown), for example the count the last full pass took in. They
	// only choose how PostgreSQL reads the span (see scanReadingsPG).
	Whole  bool
	Expect int64
	// NarrowBefore, when set, lets the scan leave the fields only the
	// window checks read NaN for readings before it, as
	// health.LedgerSample does; the scan may also return them whole.
	NarrowBefore time.Time

	fresh bool // new readings only, read as a whole history would be
}

// ScanReadings streams the readings of several drives, each after its own
// time, a drive's readings together and in time order, drives in
// ascending order within each of the two ways PostgreSQL reads them (see
// scanReadingsPG), as model samples (at second resolution) with their
// exact time. fn sees each reading once; an error from fn stops the scan.
func (s *Store) ScanReadings(ctx context.Context, from []ScanFrom, fn func(driveID, positionID int64, at time.Time, smp health.Sample) error) error {
	if len(from) == 0 {
		return nil
	}
	if s.dialect == Postgres {
		return s.scanReadingsPG(ctx, from, fn)
	}
	return s.scanReadingsSQLite(ctx, from, fn)
}

// readingFields are the columns ScanReadings reads, in decodeReadingRow's
// order; windowOnly marks those only the window checks read, which
// health.LedgerSample drops.
var readingFields = [...]struct {
	col        string
	windowOnly bool
}{
	{"drive_id", false}, {"position_id", false}, {"at", false},
	{"internal_air_c", false}, {"ambient_c", false}, {"heatsink_c", false}, {"current_a", false},
	{"peak_current_a", true}, {"frequency_hz", false}, {"bus_v", true}, {"bus_ripple_v", true},
	{"capacitance_uf", true}, {"esr_milliohm", true},
}

// readingSelect is the select list of readingFields over readings r. With
// narrowBefore (an SQL expression) set, the window-only columns read NULL
// for readings before it: PostgreSQL's cost of sending a row is mostly per
// value, and a full recompute needs them only for the trailing window.
func readingSelect(narrowBefore string) string {
	cols := make([]string, len(readingFields))
	for i, f := range readingFields {
		cols[i] = "r." + f.col
		if f.windowOnly && narrowBefore != "" {
			cols[i] = "CASE WHEN r.at >= " + narrowBefore + " THEN r." + f.col + " END"
		}
	}
	return strings.Join(cols, ", ")
}

// readingColumns is the select list of every reading field.
var readingColumns = readingSelect("")

// The physical read takes whole histories in groups of at most
// physicalGroupRows readings (about 40 MB held at once) and
// physicalGroupDrives drives; a history of unknown size counts as
// physicalGroupRows / physicalGroupDrives readings.
const (
	physicalGroupRows   = 400_000
	physicalGroupDrives = 50
)

// recentSpan is how far before the latest watermark of a batch another
// drive's watermark may lie for its new readings to be read in stored order
// with the batch's (see scanReadingsPG): a group's read starts at its
// earliest watermark, so a drive further behind would make every drive of
// its group read back that far.
const recentSpan = 7 * 24 * time.Hour

// errGroupTooLarge stops a physical read that outgrew its memory bound.
var errGroupTooLarge = errors.New("group of spans larger than expected")

// scanReadingsPG reads with pgx directly on a pooled connection: binary
// rows and no database/sql conversion, which matters at millions of rows.
//
// Readings are stored in arrival order, every drive's readings of an hour
// side by side, so one drive's history is spread over a page per reading.
// Whole histories (a full recompute) are read in groups of drives, in the
// order PostgreSQL stores them, each page once, then sorted by drive and
// time here: on bench assess (1000 drives × 5000 hourly readings) that took
// a batch's scan from about 1.1 s of PostgreSQL's time to about a third.
// Spans of new readings (an incremental run) whose watermarks lie within
// recentSpan of the batch's latest are read the same way: on bench assess
// (50 new readings on each of 1000 drives) that halved PostgreSQL's time
// for the run's scans, 147 to 69 ms. Other spans are read by a probe of each
// drive's range in the primary key. A history larger than a group, and a
// group that turns out larger than its bound as it is read, are probed
// instead, so memory stays bounded.
func (s *Store) scanReadingsPG(ctx context.Context, from []ScanFrom, fn func(int64, int64, time.Time, health.Sample) error) error {
	spans := slices.Clone(from)
	slices.SortStableFunc(spans, func(a, b ScanFrom) int { return cmp.Compare(a.DriveID, b.DriveID) })
	limit := int64(cmp.Or(s.scanGroupRows, physicalGroupRows))
	var latest time.Time
	for _, f := range spans {
		if !f.Whole && f.After.After(latest) {
			latest = f.After
		}
	}
	var probed, physical []ScanFrom
	for _, f := range spans {
		if !f.Whole && !f.After.Before(latest.Add(-recentSpan)) {
			// New readings since a recent watermark, as an incremental
			// run has for nearly every drive: read in stored order too.
			f.Whole, f.Expect, f.fresh = true, 0, true
		}
		if f.Whole && f.Expect <= limit {
			if f.Expect <= 0 {
				f.Expect = max(limit/physicalGroupDrives, 1)
			}
			physical = append(physical, f)
		} else {
			probed = append(probed, f)
		}
	}
	conn, err := s.sqlDB.Conn(ctx)
	if err != nil {
		return fmt.Errorf("scan readings: %w", translate(err))
	}
	defer conn.Close()
	err = conn.Raw(func(dc any) error {
		return pgx.BeginFunc(ctx, dc.(*stdlib.Conn).Conn(), func(tx pgx.Tx) error {
			// JIT: a long scan's estimated cost is high enough to
			// compile its plan, which costs more than it saves here.
			if _, err := tx.Exec(ctx, "SET LOCAL jit = off", pgx.QueryExecModeSimpleProtocol); err != nil {
				return fmt.Errorf("scan readings: %w", translate(err))
			}
			if len(physical) > 0 {
				if _, err := tx.Exec(ctx, physicalScanSettings(false), pgx.QueryExecModeSimpleProtocol); err != nil {
					return fmt.Errorf("scan readings: %w", translate(err))
				}
			}
			// Whole histories first, then new readings, each under its
			// own settings (physicalScanSettings).
			whole, fresh := splitFresh(physical)
			for i, spans := range [][]ScanFrom{whole, fresh} {
				if i == 1 && len(spans) > 0 {
					if _, err := tx.Exec(ctx, physicalScanSettings(true), pgx.QueryExecModeSimpleProtocol); err != nil {
						return fmt.Errorf("scan readings: %w", translate(err))
					}
				}
				for len(spans) > 0 {
					n, rows := 0, int64(0)
					for n < len(spans) && n < physicalGroupDrives && (n == 0 || rows+spans[n].Expect <= limit) {
						rows += spans[n].Expect
						n++
					}
					err := scanPhysical(ctx, tx, spans[:n], int(limit), i == 1, fn)
					if errors.Is(err, errGroupTooLarge) {
						probed = append(probed, spans[:n]...)
						err = nil
					}
					if err != nil {
						return err
					}
					spans = spans[n:]
				}
			}
			if len(probed) == 0 {
				return nil
			}
			if _, err := tx.Exec(ctx, "SET LOCAL enable_indexscan = on; SET LOCAL enable_seqscan = on", pgx.QueryExecModeSimpleProtocol); err != nil {
				return fmt.Errorf("scan readings: %w", translate(err))
			}
			slices.SortStableFunc(probed, func(a, b ScanFrom) int { return cmp.Compare(a.DriveID, b.DriveID) })
			return scanProbed(ctx, tx, probed, fn)
		})
	})
	if err != nil && !errors.Is(err, ErrUnavailable) {
		// Beginning or ending the transaction can meet a lost
		// connection too.
		if t := translate(err); errors.Is(t, ErrUnavailable) {
			return fmt.Errorf("scan readings: %w", t)
		}
	}
	return err
}

// splitFresh splits the spans read in stored order into whole histories
// and new readings (ScanFrom.fresh), each in the order given.
func splitFresh(spans []ScanFrom) (whole, fresh []ScanFrom) {
	for _, f := range spans {
		if f.fresh {
			fresh = append(fresh, f)
		} else {
			whole = append(whole, f)
		}
	}
	return whole, fresh
}

// physicalScanSettings are the planner settings of scanPhysical's read,
// of whole histories or of new readings (fresh). A plain index scan would
// read in key order, page by page per reading again; bitmap and sequential
// scans read pages in stored order. New readings are read with sequential
// scans off too, so PostgreSQL takes the primary key to the recent
// readings and then their pages in stored order (a bitmap scan) whatever
// its statistics say. Planned from statistics, a month's partition
// analysed while nearly empty (as a new one is, until autovacuum next
// analyses it) looked free to scan whole, and the cached generic plan then
// read all of that month's readings for every group of drives: on bench
// assess, with the new readings in a new month, 50 ms per group and over
// 0.9 s of an incremental run's 1.1 s.
func physicalScanSettings(fresh bool) string {
	if fresh {
		return "SET LOCAL enable_indexscan = off; SET LOCAL enable_seqscan = off"
	}
	return "SET LOCAL enable_indexscan = off"
}

// physicalScanQuery is scanPhysical's statement with the select list sel.
// The read of new readings has its own text, which keeps its cached plan
// (planned under its own settings) apart from the whole-history read's.
func physicalScanQuery(sel string, fresh bool) string {
	q := "SELECT " + sel + " FROM readings r WHERE r.drive_id = ANY($1) AND r.at > $2 AND r.at < $3"
	if fresh {
		q = "/* new readings */ " + q
	}
	return q
}

// openEnd stands for a span without an end.
var openEnd = time.Date(9999, 1, 1, 0, 0, 0, 0, time.UTC)

func spanEnd(f ScanFrom) time.Time {
	if f.Before.IsZero() {
		return openEnd
	}
	return f.Before.UTC()
}

// scanProbed reads each span by a LATERAL probe of its range in the
// primary key, ordered by time and fenced with OFFSET 0 so the planner
// keeps it per drive. The spans are unnested in drive order, and a LATERAL
// join is a nested loop over them, so rows come out by drive and time with
// no sort of the whole batch; the loop checks that they do. Sorting the
// batch instead (ORDER BY drive, time on top) sorted half a million rows a
// batch on bench assess, spilled to disk at the default work_mem. A plain
// join of the spans to readings was worse: PostgreSQL hashed a sequential
// scan of every partition, blind to the per-drive bounds, so an
// incremental run read all history.
func scanProbed(ctx context.Context, tx pgx.Tx, spans []ScanFrom, fn func(int64, int64, time.Time, health.Sample) error) error {
	ids := make([]int64, len(spans))
	afters := make([]time.Time, len(spans))
	befores := make([]time.Time, len(spans))
	for i, f := range spans {
		ids[i], afters[i], befores[i] = f.DriveID, f.After.UTC(), spanEnd(f)
	}
	rows, err := tx.Query(ctx, "SELECT "+readingColumns+
		" FROM unnest($1::bigint[], $2::timestamptz[], $3::timestamptz[]) AS w(drive_id, after_at, before_at)"+
		" CROSS JOIN LATERAL (SELECT * FROM readings x WHERE x.drive_id = w.drive_id AND x.at > w.after_at AND x.at < w.before_at"+
		" ORDER BY x.at OFFSET 0) r",
		ids, afters, befores)
	if err != nil {
		return fmt.Errorf("scan readings: %w", translate(err))
	}
	defer rows.Close()
	if err := binaryColumns(rows); err != nil {
		return fmt.Errorf("scan readings: %w", err)
	}
	var (
		lastDrive int64 = math.MinInt64
		lastAt    int64
	)
	for rows.Next() {
		row, err := decodeReadingRow(rows.RawValues())
		if err != nil {
			return fmt.Errorf("scan reading: %w", err)
		}
		if row.drive < lastDrive || (row.drive == lastDrive && row.atMicro <= lastAt) {
			return fmt.Errorf("scan readings: drive %d at %s came out of order", row.drive,
				time.UnixMicro(row.atMicro).UTC().Format(time.RFC3339Nano))
		}
		lastDrive, lastAt = row.drive, row.atMicro
		if err := row.emit(fn); err != nil {
			return err
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("scan readings: %w", translate(err))
	}
	return nil
}

// scanPhysical reads a group of spans with one query in the order
// PostgreSQL stores the rows, keeps each drive's rows within its own span,
// and passes them on by drive and time; fresh says the spans are new
// readings (physicalScanQuery). It passes nothing on and returns
// errGroupTooLarge once it has read more than limit readings and a
// quarter.
func scanPhysical(ctx context.Context, tx pgx.Tx, spans []ScanFrom, limit int, fresh bool, fn func(int64, int64, time.Time, health.Sample) error) error {
	ids := make([]int64, len(spans))
	lo, hi := spans[0].After.UTC(), spanEnd(spans[0])
	index := make(map[int64]int, len(spans))
	for i, f := range spans {
		ids[i], index[f.DriveID] = f.DriveID, i
		lo, hi = minTime(lo, f.After.UTC()), maxTime(hi, spanEnd(f))
	}
	// Narrow only as far as every span allows.
	narrow := spans[0].NarrowBefore
	for _, f := range spans {
		if f.NarrowBefore.Before(narrow) {
			narrow = f.NarrowBefore
		}
	}
	sel, args := readingColumns, []any{ids, lo, hi}
	if !narrow.IsZero() {
		sel, args = readingSelect("$4"), append(args, narrow.UTC())
	}
	rows, err := tx.Query(ctx, physicalScanQuery(sel, fresh), args...)
	if err != nil {
		return fmt.Errorf("scan readings: %w", translate(err))
	}
	defer rows.Close()
	if err := binaryColumns(rows); err != nil {
		return fmt.Errorf("scan readings: %w", err)
	}
	got := make([][]readingRow, len(spans))
	read := 0
	for rows.Next() {
		if read++; read > limit+limit/4 {
			return errGroupTooLarge
		}
		row, err := decodeReadingRow(rows.RawValues())
		if err != nil {
			return fmt.Errorf("scan reading: %w", err)
		}
		i, ok := index[row.drive]
		if !ok {
			return fmt.Errorf("scan readings: drive %d was not asked for", row.drive)
		}
		f := spans[i]
		if row.atMicro <= f.After.UnixMicro() || row.atMicro >= spanEnd(f).UnixMicro() {
			continue
		}
		if got[i] == nil {
			// A history's size (known, or guessed as a group's share of
			// the bound) is allocated at once; new readings, usually a
			// few, grow as they come.
			n := min(f.Expect+f.Expect/8, int64(limit))
			if f.fresh {
				n = 64
			}
			got[i] = make([]readingRow, 0, n)
		}
		got[i] = append(got[i], row)
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("scan readings: %w", translate(err))
	}
	rows.Close()
	for i := range got {
		// Stored order is arrival order: nearly sorted by time already.
		slices.SortFunc(got[i], func(a, b readingRow) int { return cmp.Compare(a.atMicro, b.atMicro) })
		for k := range got[i] {
			if err := got[i][k].emit(fn); err != nil {
				return err
			}
		}
		got[i] = nil
	}
	return nil
}

// emit passes the row on as a model sample with its exact time.
func (r *readingRow) emit(fn func(int64, int64, time.Time, health.Sample) error) error {
	at := time.UnixMicro(r.atMicro).UTC()
	return fn(r.drive, r.position, at, sampleOf(at.Unix(), r.values))
}

func minTime(a, b time.Time) time.Time {
	if b.Before(a) {
		return b
	}
	return a
}

func maxTime(a, b time.Time) time.Time {
	if b.After(a) {
		return b
	}
	return a
}

// readingRow is one row of readingColumns as decoded from the wire.
type readingRow struct {
	drive, position int64
	atMicro         int64 // Unix microseconds
	values          [10]float64
}

// pgEpochMicro is PostgreSQL's timestamp epoch, 2000-01-01 UTC, in Unix
// microseconds.
const pgEpochMicro = 946684800 * 1e6

// binaryColumns checks that every column of readingColumns comes in
// PostgreSQL's binary format, which decodeReadingRow reads. A query that
// failed (the database went away) has no columns: its own error is
// returned then.
func binaryColumns(rows pgx.Rows) error {
	fields := rows.FieldDescriptions()
	if len(fields) == 0 {
		rows.Close()
		if err := rows.Err(); err != nil {
			return translate(err)
		}
	}
	if len(fields) != len(readingFields) {
		return fmt.Errorf("%d columns, want %d", len(fields), len(readingFields))
	}
	for _, f := range fields {
		if f.Format != pgtype.BinaryFormatCode {
			return fmt.Errorf("column %s is not in binary format", f.Name)
		}
	}
	return nil
}

// decodeReadingRow decodes a row of readingColumns in PostgreSQL's binary
// format: int8 and float8 as 8 big-endian bytes, timestamptz as int8
// microseconds since 2000-01-01 UTC, NULL as a nil value (NaN for a
// reading's field). pgx's generic Scan does the same through a scan plan
// and an interface per value; on a full assessment, millions of rows of 13
// values, that was a sixth of the job's processor time. TestDecodeReadingRow
// holds this to pgx's own decoding.
func decodeReadingRow(raw [][]byte) (readingRow, error) {
	var r readingRow
	if len(raw) != len(readingFields) {
		return r, fmt.Errorf("%d values, want %d", len(raw), len(readingFields))
	}
	for i, b := range raw {
		if b == nil {
			switch i {
			case 0, 2: // drive_id and at are the primary key
				return r, fmt.Errorf("column %d is null", i)
			case 1: // no position: left 0
			default:
				r.values[i-3] = math.NaN()
			}
			continue
		}
		if len(b) != 8 {
			return r, fmt.Errorf("column %d has %d bytes, want 8", i, len(b))
		}
		u := binary.BigEndian.Uint64(b)
		switch i {
		case 0:
			r.drive = int64(u)
		case 1:
			r.position = int64(u)
		case 2:
			r.atMicro = int64(u) + pgEpochMicro
		default:
			r.values[i-3] = math.Float64frombits(u)
		}
	}
	return r, nil
}

func (s *Store) scanReadingsSQLite(ctx context.Context, from []ScanFrom, fn func(int64, int64, time.Time, health.Sample) error) error {
	for _, f := range from {
		before := int64(math.MaxInt64)
		if !f.Before.IsZero() {
			before = f.Before.UnixMicro()
		}
		rows, err := s.sqlDB.QueryContext(ctx, "SELECT "+readingColumns+" FROM readings r WHERE r.drive_id = ? AND r.at > ? AND r.at < ? ORDER BY r.at",
			f.DriveID, f.After.UnixMicro(), before)
		if err != nil {
			return fmt.Errorf("scan readings of drive %d: %w", f.DriveID, translate(err))
		}
		if err := scanSQLiteRows(rows, fn); err != nil {
			return err
		}
	}
	return nil
}

func scanSQLiteRows(rows *sql.Rows, fn func(int64, int64, time.Time, health.Sample) error) error {
	defer rows.Close()
	var (
		d, p, at int64
		v        [10]sql.NullFloat64
	)
	dest := []any{&d, &p, &at}
	for i := range v {
		dest = append(dest, &v[i])
	}
	for rows.Next() {
		if err := rows.Scan(dest...); err != nil {
			return fmt.Errorf("scan reading: %w", err)
		}
		var f [10]float64
		for i, x := range v {
			if x.Valid {
				f[i] = x.Float64
			} else {
				f[i] = math.NaN()
			}
		}
		t := time.UnixMicro(at).UTC()
		if err := fn(d, p, t, sampleOf(t.Unix(), f)); err != nil {
			return err
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("scan readings: %w", translate(err))
	}
	return nil
}

// sampleOf builds a sample from the columns after drive, position and at,
// in readingColumns order.
func sampleOf(at int64, v [10]float64) health.Sample {
	return health.Sample{At: at, InternalAirC: v[0], AmbientC: v[1], HeatsinkC: v[2], CurrentA: v[3], PeakCurrentA: v[4],
		FrequencyHz: v[5], BusV: v[6], BusRippleV: v[7], CapacitanceUF: v[8], ESRMilliohm: v[9]}
}

// advanceWatermarks records, for a batch of results, how far each drive's
// readings are assessed, in three statements whatever the batch size:
//
//   - assessed_to moves to the newest reading each run took in (the row is
//     made when missing);
//   - recompute_from is cleared only where it still holds the mark the run
//     started from, so a late reading that arrived during the run keeps
//     its mark;
//   - where readings exist in the range an incremental run covered,
//     (ScannedAfter, AssessedTo], beyond the count it took in (an ingest
//     committed mid-run), recompute_from is set so the next run recomputes.
func (s *Store) advanceWatermarks(tx *gorm.DB, rs []AssessResult) error {
	type row struct {
		id      int64
		to      time.Time
		seen    *time.Time
		after   *time.Time
		scanned int64
	}
	var rows []row
	for _, r := range rs {
		if r.Retired || r.AssessedTo == nil {
			continue
		}
		rows = append(rows, row{r.DriveID, *r.AssessedTo, r.RecomputeSeen, r.ScannedAfter, r.Scanned})
	}
	if len(rows) == 0 {
		return nil
	}
	same := "IS NOT DISTINCT FROM"
	if s.dialect == SQLite {
		same = "IS"
	}
	cells := make([][]any, len(rows))
	for i, r := range rows {
		cells[i] = []any{r.id, r.to}
	}
	v, args := s.derivedTable([]string{"drive_id", "assessed_to"}, []colType{colBigint, colTime}, cells)
	if err := tx.Exec(`INSERT INTO drive_watermarks (drive_id, assessed_to, recompute_from)
		SELECT v.drive_id, v.assessed_to, NULL FROM `+v+`
		WHERE true ON CONFLICT (drive_id) DO UPDATE SET assessed_to = excluded.assessed_to`, args...).Error; err != nil {
		return fmt.Errorf("advance watermarks: %w", translate(err))
	}
	for i, r := range rows {
		cells[i] = []any{r.id, r.seen}
	}
	v, args = s.derivedTable([]string{"drive_id", "seen"}, []colType{colBigint, colTime}, cells)
	if err := tx.Exec(`UPDATE drive_watermarks SET recompute_from = NULL
		FROM `+v+`
		WHERE drive_watermarks.drive_id = v.drive_id AND drive_watermarks.recompute_from `+same+` v.seen`, args...).Error; err != nil {
		return fmt.Errorf("clear recompute marks: %w", translate(err))
	}

	// Readings that landed in a covered range while the run was reading:
	// one index probe per drive (a correlated count, which both planners
	// run per row; a join lets PostgreSQL pick a scan of every reading).
	var checked []row
	cells = cells[:0]
	for _, r := range rows {
		if r.after != nil && r.after.Before(r.to) {
			checked = append(checked, r)
			cells = append(cells, []any{r.id, *r.after, r.to})
		}
	}
	if len(checked) == 0 {
		return nil
	}
	var counts []struct {
		DriveID int64
		N       int64
	}
	v, args = s.derivedTable([]string{"drive_id", "after_at", "to_at"}, []colType{colBigint, colTime, colTime}, cells)
	if err := tx.Raw(`SELECT v.drive_id,
		(SELECT count(*) FROM readings r WHERE r.drive_id = v.drive_id AND r.at > v.after_at AND r.at <= v.to_at) AS n
		FROM `+v, args...).Scan(&counts).Error; err != nil {
		return fmt.Errorf("count covered readings: %w", translate(err))
	}
	byID := map[int64]row{}
	for _, r := range checked {
		byID[r.id] = r
	}
	for _, c := range counts {
		r := byID[c.DriveID]
		if c.N == r.scanned {
			continue
		}
		if err := tx.Exec("UPDATE drive_watermarks SET recompute_from = ? WHERE drive_id = ?", s.timeArg(*r.after), r.id).Error; err != nil {
			return fmt.Errorf("mark drive %d: %w", r.id, translate(err))
		}
	}
	return nil
}

// colType is the type of a column of derivedTable.
type colType int

const (
	colBigint colType = iota // int64
	colTime                  // time.Time, *time.Time (nil is NULL)
)

// derivedTable returns a table expression for a FROM clause, aliased v,
// with the named columns holding rows (one []any per row, in column
// order), and the arguments it takes. On PostgreSQL it is an unnest of one array per column, so the
// statement has a fixed text and as many parameters as columns whatever
// the row count (a UNION ALL of a hundred SELECTs took longer to plan
// than to run); SQLite, which has no arrays, gets the UNION ALL with one
// placeholder per cell.
func (s *Store) derivedTable(names []string, types []colType, rows [][]any) (string, []any) {
	if s.dialect == SQLite {
		parts := make([]string, len(names))
		for i, n := range names {
			parts[i] = "CAST(? AS integer) AS " + n
		}
		one := "SELECT " + strings.Join(parts, ", ")
		var args []any
		for _, r := range rows {
			for i, c := range r {
				if types[i] == colTime {
					c = s.optTimeArg(c)
				}
				args = append(args, c)
			}
		}
		return "(" + strings.TrimSuffix(strings.Repeat(one+" UNION ALL ", len(rows)), " UNION ALL ") + ") AS v", args
	}
	arrays := make([]string, len(names))
	args := make([]any, len(names))
	for i, t := range types {
		var b strings.Builder
		b.WriteByte('{')
		for j, r := range rows {
			if j > 0 {
				b.WriteByte(',')
			}
			switch t {
			case colBigint:
				b.WriteString(strconv.FormatInt(r[i].(int64), 10))
			case colTime:
				if tm, ok := timeOf(r[i]); ok {
					b.WriteString(tm.UTC().Format(pgTimeLayout))
				} else {
					b.WriteString("NULL")
				}
			}
		}
		b.WriteByte('}')
		args[i] = b.String()
		arrays[i] = "CAST(? AS bigint[])"
		if t == colTime {
			arrays[i] = "CAST(? AS timestamptz[])"
		}
	}
	return "unnest(" + strings.Join(arrays, ", ") + ") AS v(" + strings.Join(names, ", ") + ")", args
}

// pgTimeLayout writes a UTC time as PostgreSQL reads a timestamptz
// literal, to the microsecond it keeps.
const pgTimeLayout = "2006-01-02T15:04:05.999999Z"

// timeOf reads a time.Time or a non-nil *time.Time.
func timeOf(v any) (time.Time, bool) {
	switch t := v.(type) {
	case time.Time:
		return t, true
	case *time.Time:
		if t != nil {
			return *t, true
		}
	}
	return time.Time{}, false
}

// optTimeArg is timeArg for a time.Time or *time.Time (nil stays nil).
func (s *Store) optTimeArg(v any) any {
	if t, ok := timeOf(v); ok {
		return s.timeArg(t)
	}
	return nil
}

// CopyReadings writes every reading's assessed columns (those ScanReadings
// returns, narrowed before narrowBefore as ScanFrom.NarrowBefore allows) to
// w in PostgreSQL's binary COPY format: the least work there is of reading
// them out of the server, which `kelvard bench assess` measures as the
// floor under a full assessment. It returns the rows copied and needs
// PostgreSQL.
func (s *Store) CopyReadings(ctx context.Context, w io.Writer, narrowBefore time.Time) (int64, error) {
	if s.dialect != Postgres {
		return 0, errors.New("copy readings: needs PostgreSQL")
	}
	conn, err := s.sqlDB.Conn(ctx)
	if err != nil {
		return 0, fmt.Errorf("copy readings: %w", translate(err))
	}
	defer conn.Close()
	sel := readingColumns
	if !narrowBefore.IsZero() {
		// COPY takes no parameters; a formatted time is safe to inline.
		sel = readingSelect("'" + narrowBefore.UTC().Format(pgTimeLayout) + "'::timestamptz")
	}
	var n int64
	err = conn.Raw(func(dc any) error {
		tag, err := dc.(*stdlib.Conn).Conn().PgConn().CopyTo(ctx, w,
			"COPY (SELECT "+sel+" FROM readings r) TO STDOUT (FORMAT binary)")
		n = tag.RowsAffected()
		return err
	})
	if err != nil {
		return 0, fmt.Errorf("copy readings: %w", translate(err))
	}
	return n, nil
}
