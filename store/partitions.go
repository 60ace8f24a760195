package store

import (
	"context"
	"fmt"
	"hash/fnv"
	"slices"
	"strings"
	"sync"
	"time"
)

// Readings on PostgreSQL are partitioned by UTC month: readings_pYYYYMM
// holds [first of the month, first of the next). The server makes the
// partitions: ahead of time (PrepareReadingPartitions, at start and from the
// scheduler) and before it writes a batch that needs a month not yet made
// (Ingest calls EnsureReadingPartitions outside its write transaction). So
// readings_default, the DEFAULT partition, stays empty in normal running;
// should rows land there by other means, the partition made later for their
// month takes them over in the same transaction.

// partitionsAhead is how many months after the current one
// PrepareReadingPartitions makes.
const partitionsAhead = 3

// partitionCacheTTL is how long the list of existing partitions is
// trusted before it is read again (a retention job may drop old ones).
const partitionCacheTTL = time.Minute

// partitionSet caches the months whose partition is known to exist.
type partitionSet struct {
	mu     sync.Mutex
	months map[int]bool
	loaded time.Time
}

// PrepareReadingPartitions makes the readings partitions of the current
// month and the next three. It is safe to run on several replicas at once.
// On SQLite it does nothing.
func (s *Store) PrepareReadingPartitions(ctx context.Context) error {
	now := s.now()
	return s.EnsureReadingPartitions(ctx, now, now.AddDate(0, partitionsAhead, 0))
}

// EnsureReadingPartitions makes sure a readings partition exists for every
// month from the month of from to the month of to (UTC). It is safe to run
// on several replicas at once: each partition is made under a transaction
// advisory lock after a second look. Rows of the month already in the
// DEFAULT partition move to the new partition in the same transaction. On
// SQLite it does nothing.
func (s *Store) EnsureReadingPartitions(ctx context.Context, from, to time.Time) error {
	if s.dialect != Postgres {
		return nil
	}
	first, last := monthOf(from), monthOf(to)
	if first > last {
		return fmt.Errorf("readings partitions from %s to %s: the range is reversed", from.Format(time.RFC3339), to.Format(time.RFC3339))
	}
	if last-first > 12*100 {
		return fmt.Errorf("readings partitions from %s to %s: more than a century", from.Format(time.RFC3339), to.Format(time.RFC3339))
	}
	months := make([]int, 0, last-first+1)
	for m := first; m <= last; m++ {
		months = append(months, m)
	}
	return s.ensureMonths(ctx, months)
}

// ensureMonths makes the partitions of the given months that do not exist.
func (s *Store) ensureMonths(ctx context.Context, months []int) error {
	if s.dialect != Postgres || len(months) == 0 {
		return nil
	}
	for _, m := range months {
		if m < 1*12 || m > 9999*12+11 {
			return fmt.Errorf("readings partition for month %d: outside years 1 to 9999", m)
		}
	}
	ps := &s.ingest.parts
	ps.mu.Lock()
	defer ps.mu.Unlock()
	missing := func() []int {
		var out []int
		for _, m := range months {
			if !ps.months[m] {
				out = append(out, m)
			}
		}
		return out
	}
	todo := missing()
	if len(todo) == 0 && time.Since(ps.loaded) < partitionCacheTTL {
		return nil
	}
	if err := s.loadPartitions(ctx); err != nil {
		return err
	}
	for _, m := range missing() {
		if err := s.createPartition(ctx, m); err != nil {
			return err
		}
		ps.months[m] = true
	}
	return nil
}

// loadPartitions reads the names of the existing monthly partitions into
// the cache. The caller holds s.ingest.parts.mu.
func (s *Store) loadPartitions(ctx context.Context) error {
	rows, err := s.sqlDB.QueryContext(ctx, `SELECT c.relname FROM pg_inherits i JOIN pg_class c ON c.oid = i.inhrelid
		WHERE i.inhparent = 'readings'::regclass`)
	if err != nil {
		return fmt.Errorf("list readings partitions: %w", translate(err))
	}
	defer rows.Close()
	months := map[int]bool{}
	for rows.Next() {
		var name string
		if err := rows.Scan(&name); err != nil {
			return fmt.Errorf("list readings partitions: %w", err)
		}
		if m, ok := partitionMonth(name); ok {
			months[m] = true
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("list readings partitions: %w", translate(err))
	}
	s.ingest.parts.months, s.ingest.parts.loaded = months, time.Now()
	return nil
}

// partitionName names the partition of month m.
func partitionName(m int) string { return fmt.Sprintf("readings_p%04d%02d", m/12, m%12+1) }

// partitionMonth reads a partition name back; ok is false for other tables.
func partitionMonth(name string) (int, bool) {
	var y, mo int
	if len(name) != len("readings_p200601") || !strings.HasPrefix(name, "readings_p") {
		return 0, false
	}
	if _, err := fmt.Sscanf(name[len("readings_p"):], "%4d%2d", &y, &mo); err != nil || mo < 1 || mo > 12 {
		return 0, false
	}
	return y*12 + mo - 1, true
}

// monthStart returns the first instant of month m in UTC.
func monthStart(m int) time.Time { return time.Date(m/12, time.Month(m%12+1), 1, 0, 0, 0, 0, time.UTC) }

// partitionLockID is the advisory lock key held while a partition is made,
// derived from the schema so separate kelvard schemas do not wait for each
// other.
func partitionLockID(schema string) int64 {
	h := fnv.New64a()
	h.Write([]byte("kelvard readings partitions " + schema))
	return int64(h.Sum64() >> 1)
}

// createPartition makes the partition of month m unless another replica
// made it first, moving the month's rows out of the DEFAULT partition.
func (s *Store) createPartition(ctx context.Context, m int) error {
	name := partitionName(m)
	lo, hi := monthStart(m), monthStart(m+1)
	tx, err := s.sqlDB.BeginTx(ctx, nil)
	if err != nil {
		return fmt.Errorf("create %s: %w", name, translate(err))
	}
	defer tx.Rollback()
	var schema string
	if err := tx.QueryRowContext(ctx, "SELECT current_schema()").Scan(&schema); err != nil {
		return fmt.Errorf("create %s: read schema: %w", name, translate(err))
	}
	if _, err := tx.ExecContext(ctx, "SELECT pg_advisory_xact_lock($1)", partitionLockID(schema)); err != nil {
		return fmt.Errorf("create %s: lock: %w", name, translate(err))
	}
	var exists bool
	if err := tx.QueryRowContext(ctx, "SELECT to_regclass($1) IS NOT NULL", name).Scan(&exists); err != nil {
		return fmt.Errorf("create %s: %w", name, translate(err))
	}
	if exists {
		return nil
	}
	var stranded bool
	if err := tx.QueryRowContext(ctx, "SELECT EXISTS (SELECT 1 FROM readings_default WHERE at >= $1 AND at < $2)", lo, hi).Scan(&stranded); err != nil {
		return fmt.Errorf("create %s: look in the default partition: %w", name, translate(err))
	}
	steps := []string{}
	args := [][]any{}
	if stranded {
		steps = append(steps,
			"CREATE TEMP TABLE readings_moving (LIKE readings) ON COMMIT DROP",
			"WITH moved AS (DELETE FROM readings_default WHERE at >= $1 AND at < $2 RETURNING *) INSERT INTO readings_moving SELECT * FROM moved")
		args = append(args, nil, []any{lo, hi})
	}
	steps = append(steps, fmt.Sprintf("CREATE TABLE %s PARTITION OF readings FOR VALUES FROM ('%s') TO ('%s')",
		name, lo.Format("2006-01-02 15:04:05Z07:00"), hi.Format("2006-01-02 15:04:05Z07:00")))
	args = append(args, nil)
	if stranded {
		steps = append(steps, "INSERT INTO readings SELECT * FROM readings_moving")
		args = append(args, nil)
	}
	for i, q := range steps {
		if _, err := tx.ExecContext(ctx, q, args[i]...); err != nil {
			return fmt.Errorf("create %s: %w", name, translate(err))
		}
	}
	if err := tx.Commit(); err != nil {
		return fmt.Errorf("create %s: commit: %w", name, translate(err))
	}
	if stranded {
		s.log.InfoContext(ctx, "readings partition made; rows moved out of the default partition", "partition", name)
	}
	return nil
}

// ReadingPartitions lists the monthly readings partitions that exist, by
// the first instant of their month, oldest first. SQLite has none.
func (s *Store) ReadingPartitions(ctx context.Context) ([]time.Time, error) {
	if s.dialect != Postgres {
		return nil, nil
	}
	s.ingest.parts.mu.Lock()
	defer s.ingest.parts.mu.Unlock()
	if err := s.loadPartitions(ctx); err != nil {
		return nil, err
	}
	out := make([]time.Time, 0, len(s.ingest.parts.months))
	for m := range s.ingest.parts.months {
		out = append(out, monthStart(m))
	}
	slices.SortFunc(out, func(a, b time.Time) int { return a.Compare(b) })
	return out, nil
}

// forget drops a month from the cache after its partition was dropped.
func (ps *partitionSet) forget(m int) {
	ps.mu.Lock()
	defer ps.mu.Unlock()
	delete(ps.months, m)
}
