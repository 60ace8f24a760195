package store

import (
	"context"
	"database/sql"
	"encoding/json"
	"fmt"
	"slices"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/stdlib"
	"gorm.io/gorm"
)

// pgRunner runs f with the pgx connection under a transaction that txConn
// opened, between the transaction's own statements.
type pgRunner func(f func(c *pgx.Conn) error) error

// txConn is tx for work that mixes GORM statements with pgx calls on the
// same transaction: on PostgreSQL fn also gets a pgRunner on the
// transaction's connection (nil on SQLite). It retries a transaction that
// lost a serialization or deadlock race, as tx does.
func (s *Store) txConn(ctx context.Context, fn func(tx *gorm.DB, pg pgRunner) error) error {
	if s.dialect != Postgres {
		return s.tx(ctx, func(tx *gorm.DB) error { return fn(tx, nil) })
	}
	var err error
	for attempt := 0; attempt < 4; attempt++ {
		err = s.db.WithContext(ctx).Connection(func(c *gorm.DB) error {
			conn, ok := c.Statement.ConnPool.(*sql.Conn)
			if !ok {
				return fmt.Errorf("transaction connection is %T, not *sql.Conn", c.Statement.ConnPool)
			}
			return c.Transaction(func(tx *gorm.DB) error { return fn(tx, rawRunner(conn)) })
		})
		if err == nil || !retryable(err) {
			return err
		}
	}
	return err
}

// rawRunner runs pgx calls on conn through database/sql's Conn.Raw, which
// holds the connection's lock while they run; the open sql.Tx uses the
// same connection but only between them. A panic in f is returned as an
// error: let through, Conn.Raw would close the connection while the
// transaction still holds it, and wait for itself.
func rawRunner(conn *sql.Conn) pgRunner {
	return func(f func(c *pgx.Conn) error) error {
		return conn.Raw(func(dc any) (err error) {
			sc, ok := dc.(*stdlib.Conn)
			if !ok {
				return fmt.Errorf("driver connection is %T, not pgx", dc)
			}
			defer func() {
				if p := recover(); p != nil {
					err = fmt.Errorf("pgx call panicked: %v", p)
				}
			}()
			return f(sc.Conn())
		})
	}
}

// stagedUpsert writes many rows into table as one upsert: a binary COPY
// into a temporary staging table shaped like table (made once per
// connection, emptied at every commit) and one INSERT … SELECT … ON
// CONFLICT that moves them over. A multi-row INSERT with the rows as bind
// parameters, as GORM sends it, builds the whole batch (over a megabyte of
// assessment reports) in one message that pgx grows by appending; that was
// a fifth of an incremental run's processor time. COPY streams the rows in
// 64 kB messages instead.
type stagedUpsert struct {
	table    string
	columns  []string // in the order of the values each row gives
	conflict string   // the conflict target's columns
	set      string   // the SET list of DO UPDATE
}

// stage names the staging table of u.
func (u stagedUpsert) stage() string { return "kelvard_stage_" + u.table }

// createStages makes the staging tables of ups on the connection if it has
// not got them, in one round trip. LIKE … INCLUDING COMPRESSION keeps the
// target's compression method, so a large value is compressed once, in
// staging, and moved over as it is.
//
// The same round trip turns off waiting for the commit to reach disk
// (synchronous_commit): everything a save writes is derived from stored
// readings and register rows, and the watermark that says what was taken
// in commits with it, so a commit lost to a server crash is redone by the
// next run. Waiting for the flush was about a twentieth of an incremental
// run.
func createStages(ctx context.Context, c *pgx.Conn, ups ...stagedUpsert) error {
	var b strings.Builder
	b.WriteString("SET LOCAL synchronous_commit = off;")
	for _, u := range ups {
		fmt.Fprintf(&b, "CREATE TEMP TABLE IF NOT EXISTS %s (LIKE %s INCLUDING COMPRESSION) ON COMMIT DELETE ROWS;", u.stage(), u.table)
	}
	if _, err := c.Exec(ctx, b.String(), pgx.QueryExecModeSimpleProtocol); err != nil {
		return fmt.Errorf("create staging tables: %w", translate(err))
	}
	return nil
}

// run upserts rows (one value per column, in columns' order).
func (u stagedUpsert) run(ctx context.Context, c *pgx.Conn, rows [][]any) error {
	if len(rows) == 0 {
		return nil
	}
	n, err := c.CopyFrom(ctx, pgx.Identifier{u.stage()}, u.columns, pgx.CopyFromRows(rows))
	if err != nil {
		return fmt.Errorf("copy into %s: %w", u.stage(), translate(err))
	}
	if int(n) != len(rows) {
		return fmt.Errorf("copy into %s: %d rows copied, %d sent", u.stage(), n, len(rows))
	}
	cols := strings.Join(u.columns, ", ")
	// The staging table is emptied by the same statement, so a second
	// save in one transaction starts from nothing.
	q := "WITH moved AS (DELETE FROM " + u.stage() + " RETURNING " + cols + ") INSERT INTO " + u.table + " (" + cols + ") SELECT " + cols +
		" FROM moved ON CONFLICT (" + u.conflict + ") DO UPDATE SET " + u.set
	if _, err := c.Exec(ctx, q); err != nil {
		return fmt.Errorf("upsert into %s: %w", u.table, translate(err))
	}
	return nil
}

// excludedSet is the SET list assigning every column but the conflict
// target's from excluded.
func excludedSet(columns []string, keys ...string) string {
	var set []string
	for _, c := range columns {
		if !slices.Contains(keys, c) {
			set = append(set, c+" = excluded."+c)
		}
	}
	return strings.Join(set, ", ")
}

// The columns of the assessment tables in the order their pgRow methods
// give values; TestStagedColumns holds them to the GORM models.
var (
	driveStateColumns = []string{"drive_id", "capacitor_component_id", "fan_component_id", "capacitor_state", "fan_state",
		"capacitor_days", "fan_days", "measured", "params_hash", "stored_to", "trend_at", "unobserved_capacitor_h",
		"unobserved_fan_h", "updated_at"}
	assessmentColumns = []string{"drive_id", "site_id", "position_id", "at", "capacitor_life_used_fraction", "capacitor_remaining_h",
		"capacitor_end_of_life", "fan_life_used_fraction", "fan_remaining_h", "fan_end_of_life", "allowed_current_a",
		"utilisation_fraction", "health_band", "risk_score", "health_score", "report"}
	dayChunkColumns      = []string{"drive_id", "ledger", "chunk", "days"}
	assessmentDayColumns = []string{"drive_id", "day", "position_id", "capacitor_life_used_fraction", "fan_life_used_fraction",
		"capacitor_end_of_life", "utilisation_fraction", "allowed_current_a", "risk_score", "health_band"}
)

// The upserts SaveAssessments makes on PostgreSQL. A state whose closed
// days are unchanged carries none (encodeLedgers), and the stored ones
// stay.
var (
	driveStateUpsert = stagedUpsert{table: "drive_state", columns: driveStateColumns, conflict: "drive_id",
		set: excludedSet(driveStateColumns, "drive_id", "capacitor_days", "fan_days") +
			", capacitor_days = COALESCE(excluded.capacitor_days, drive_state.capacitor_days)" +
			", fan_days = COALESCE(excluded.fan_days, drive_state.fan_days)"}
	assessmentUpsert    = stagedUpsert{table: "assessments", columns: assessmentColumns, conflict: "drive_id", set: excludedSet(assessmentColumns, "drive_id")}
	assessmentDayUpsert = stagedUpsert{table: "assessment_days", columns: assessmentDayColumns, conflict: "drive_id, day",
		set: excludedSet(assessmentDayColumns, "drive_id", "day")}
	dayChunkUpsert = stagedUpsert{table: "ledger_day_chunks", columns: dayChunkColumns, conflict: "drive_id, ledger, chunk",
		set: excludedSet(dayChunkColumns, "drive_id", "ledger", "chunk")}
)

// pgRow gives the state's values in driveStateColumns order, its ledgers
// encoded (encodeLedgers) and Measured as JSON, as GORM's JSON serializer
// writes it.
func (st *DriveState) pgRow() ([]any, error) {
	var measured any
	if st.Measured != nil {
		b, err := json.Marshal(st.Measured)
		if err != nil {
			return nil, fmt.Errorf("encode measured capacitor report of drive %d: %w", st.DriveID, err)
		}
		measured = string(b)
	}
	return []any{st.DriveID, st.CapacitorComponentID, st.FanComponentID, st.CapacitorLedger, st.FanLedger,
		nilIfEmpty(st.CapacitorDays), nilIfEmpty(st.FanDays), measured, st.ParamsHash, st.StoredTo, st.TrendAt,
		st.UnobservedCapacitorH, st.UnobservedFanH, st.UpdatedAt.UTC()}, nil
}

// nilIfEmpty is NullBytes's value: NULL when nil.
func nilIfEmpty(b NullBytes) any {
	if b == nil {
		return nil
	}
	return []byte(b)
}

// pgRow gives the assessment's values in assessmentColumns order.
func (a *Assessment) pgRow() []any {
	return []any{a.DriveID, a.SiteID, a.PositionID, a.At.UTC(), a.CapacitorLifeUsedFraction, a.CapacitorRemainingH,
		a.CapacitorEndOfLife, a.FanLifeUsedFraction, a.FanRemainingH, a.FanEndOfLife, a.AllowedCurrentA,
		a.UtilisationFraction, string(a.HealthBand), a.RiskScore, a.HealthScore, []byte(a.Report)}
}

// pgRow gives the day's values in assessmentDayColumns order.
func (d *AssessmentDay) pgRow() ([]any, error) {
	day, err := time.Parse(time.DateOnly, d.Day)
	if err != nil {
		return nil, fmt.Errorf("history day of drive %d: %w", d.DriveID, err)
	}
	return []any{d.DriveID, day, d.PositionID, d.CapacitorLifeUsedFraction, d.FanLifeUsedFraction, d.CapacitorEndOfLife,
		d.UtilisationFraction, d.AllowedCurrentA, d.RiskScore, string(d.HealthBand)}, nil
}

// saveAssessedPG writes a batch's states, their ledgers' changed day
// chunks, assessments and history rows with staged upserts on the
// transaction's connection.
func saveAssessedPG(ctx context.Context, pg pgRunner, states []DriveState, rows []Assessment, days []AssessmentDay, chunks *dayChunkWrites) error {
	stateRows := make([][]any, len(states))
	for i := range states {
		r, err := states[i].pgRow()
		if err != nil {
			return err
		}
		stateRows[i] = r
	}
	assessRows := make([][]any, len(rows))
	for i := range rows {
		assessRows[i] = rows[i].pgRow()
	}
	dayRows := make([][]any, len(days))
	for i := range days {
		r, err := days[i].pgRow()
		if err != nil {
			return err
		}
		dayRows[i] = r
	}
	return pg(func(c *pgx.Conn) error {
		if err := createStages(ctx, c, driveStateUpsert, assessmentUpsert, assessmentDayUpsert, dayChunkUpsert); err != nil {
			return err
		}
		if err := driveStateUpsert.run(ctx, c, stateRows); err != nil {
			return fmt.Errorf("save drive states: %w", err)
		}
		if err := chunks.writePG(ctx, c); err != nil {
			return err
		}
		if err := assessmentUpsert.run(ctx, c, assessRows); err != nil {
			return fmt.Errorf("save assessments: %w", err)
		}
		if err := assessmentDayUpsert.run(ctx, c, dayRows); err != nil {
			return fmt.Errorf("save assessment history: %w", err)
		}
		return nil
	})
}
