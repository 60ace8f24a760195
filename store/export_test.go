package store

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/stdlib"
)

// ParseCSVQuoted exposes the encoding/csv path of ParseReadingsCSV, so the
// fuzz test can hold the hand split to it.
var ParseCSVQuoted = parseCSVQuoted

// SetScanGroupRows lowers the bound on a physical read of whole histories,
// so a test can make a group outgrow it.
func SetScanGroupRows(s *Store, n int) { s.scanGroupRows = n }

// SentDayChunks is how many closed-day chunks the last save of st wrote or
// deleted.
func SentDayChunks(st *DriveState) int { return st.sentChunks }

// DayChunkDays is the number of days in a chunk of ledger_day_chunks.
const DayChunkDays = dayChunkDays

// ExplainPhysicalScan returns PostgreSQL's generic plan (the one a cached
// statement settles on) of the read in stored order of whole histories or
// of new readings (fresh) of the drives ids after after, under the
// settings scanReadingsPG gives that read.
func ExplainPhysicalScan(ctx context.Context, s *Store, fresh bool, ids []int64, after time.Time) (string, error) {
	conn, err := s.sqlDB.Conn(ctx)
	if err != nil {
		return "", err
	}
	defer conn.Close()
	var plan strings.Builder
	err = conn.Raw(func(dc any) error {
		c := dc.(*stdlib.Conn).Conn()
		// A prepared statement outlives the transaction, even one that
		// failed: it is dropped after it, on the same connection.
		prepared := false
		err := pgx.BeginFunc(ctx, c, func(tx pgx.Tx) error {
			for i, q := range []string{
				physicalScanSettings(fresh),
				"SET LOCAL plan_cache_mode = force_generic_plan",
				"PREPARE kelvard_explain (bigint[], timestamptz, timestamptz) AS " + physicalScanQuery(readingColumns, fresh),
			} {
				if _, err := tx.Exec(ctx, q, pgx.QueryExecModeSimpleProtocol); err != nil {
					return err
				}
				prepared = i == 2
			}
			idText := make([]string, len(ids))
			for i, id := range ids {
				idText[i] = strconv.FormatInt(id, 10)
			}
			rows, err := tx.Query(ctx, fmt.Sprintf("EXPLAIN EXECUTE kelvard_explain ('{%s}', '%s', '%s')",
				strings.Join(idText, ","), after.UTC().Format(pgTimeLayout), openEnd.Format(pgTimeLayout)), pgx.QueryExecModeSimpleProtocol)
			if err != nil {
				return err
			}
			defer rows.Close()
			for rows.Next() {
				var line string
				if err := rows.Scan(&line); err != nil {
					return err
				}
				plan.WriteString(line + "\n")
			}
			return rows.Err()
		})
		if prepared {
			if _, derr := c.Exec(ctx, "DEALLOCATE kelvard_explain", pgx.QueryExecModeSimpleProtocol); err == nil {
				err = derr
			}
		}
		return err
	})
	return plan.String(), err
}
