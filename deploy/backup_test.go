package deploy

import (
	"context"
	"database/sql"
	"fmt"
	"net/url"
	"path/filepath"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
	_ "github.com/jackc/pgx/v5/stdlib" // database/sql driver "pgx" for the comparison queries

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestPgDumpRestoreRoundTrip follows the README's backup and restore of a
// PostgreSQL store: pg_dump in the custom format, pg_restore into a new
// database, and kelvard started on the copy. Every table (the readings
// partitions included) must come back with the same rows, migrations must
// find nothing to do, the latest assessment must read the same, and the
// restored store must take new register rows and readings (its sequences
// and partitions came back too).
func TestPgDumpRestoreRoundTrip(t *testing.T) {
	for _, tool := range []string{"pg_dump", "pg_restore"} {
		storetest.RequireTool(t, tool, "postgresql-client")
	}
	ctx := context.Background()
	now := time.Date(2026, 2, 10, 0, 0, 0, 0, time.UTC)
	clock := store.Options{Now: func() time.Time { return now }}
	srcURL := storetest.URL(t, store.Postgres)
	src, err := store.Open(ctx, srcURL, clock)
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	version, err := src.Migrate(ctx)
	if err != nil {
		t.Fatal(err)
	}
	f := storetest.Build(t, src, "dump")
	// Hourly readings across three months, so three partitions hold rows.
	var rows []store.Reading
	for at := time.Date(2025, 12, 1, 0, 0, 0, 0, time.UTC); at.Before(now); at = at.Add(time.Hour) {
		air, cur := 35+5*float64(at.Hour()%12)/12, 40.0
		rows = append(rows, store.Reading{PositionID: f.Position.ID, At: at, InternalAirC: &air, CurrentA: &cur})
	}
	if _, err := src.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
		t.Fatal(err)
	}
	if _, err := jobs.NewAssessor(src, jobs.AssessConfig{Now: clock.Now}).Assess(ctx, jobs.AssessOptions{}); err != nil {
		t.Fatal(err)
	}
	before, err := src.LatestAssessment(ctx, f.Drive.ID)
	if err != nil {
		t.Fatal(err)
	}

	// The dump: one schema here, so tests can share the server; the README
	// dumps the whole database the same way.
	u, err := url.Parse(srcURL)
	if err != nil {
		t.Fatal(err)
	}
	schema := u.Query().Get("search_path")
	plain := *u
	plain.RawQuery = "sslmode=disable"
	dump := filepath.Join(t.TempDir(), "kelvard.dump")
	runTool(t, ".", "pg_dump", "--format=custom", "--schema="+schema, "--file="+dump, "--dbname="+plain.String())

	admin, err := sql.Open("pgx", plain.String())
	if err != nil {
		t.Fatal(err)
	}
	dbName := fmt.Sprintf("kelvard_restore_%d", time.Now().UnixNano())
	if _, err := admin.ExecContext(ctx, "CREATE DATABASE "+dbName); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		if _, err := admin.ExecContext(context.Background(), "DROP DATABASE IF EXISTS "+dbName+" WITH (FORCE)"); err != nil {
			t.Logf("drop %s: %v", dbName, err)
		}
		admin.Close()
	})
	target := plain
	target.Path = "/" + dbName
	runTool(t, ".", "pg_restore", "--no-owner", "--exit-on-error", "--dbname="+target.String(), dump)

	restoredURL := target
	q := restoredURL.Query()
	q.Set("search_path", schema)
	restoredURL.RawQuery = q.Encode()
	dst, err := store.Open(ctx, restoredURL.String(), clock)
	if err != nil {
		t.Fatal(err)
	}
	defer dst.Close()
	if v, err := dst.Migrate(ctx); err != nil || v != version {
		t.Fatalf("migrations on the restored copy: version %d, %v; want %d and nothing to do", v, err, version)
	}

	// Same rows in every table, compared by count and by a digest of the
	// rows in a fixed order.
	tables := tablesOf(t, src, schema)
	if len(tables) < 10 {
		t.Fatalf("only %d tables in the source schema: %v", len(tables), tables)
	}
	for _, table := range tables {
		a, b := digest(t, src, table), digest(t, dst, table)
		if a != b {
			t.Errorf("table %s: source %s, restored %s", table, a, b)
		}
	}
	after, err := dst.LatestAssessment(ctx, f.Drive.ID)
	if err != nil || after.CapacitorLifeUsedFraction != before.CapacitorLifeUsedFraction || !after.At.Equal(before.At) {
		t.Errorf("latest assessment restored as %+v (%v), was %+v", after, err, before)
	}

	// The copy works on: a new site gets a fresh id and a new reading lands.
	site, err := store.Create(ctx, dst, func(v *store.Site) error {
		v.Name, v.AmbientMinC, v.AmbientMaxC = "Works after restore", -5, 35
		return nil
	})
	if err != nil || site.ID <= f.Site.ID {
		t.Errorf("new site on the restored copy: id %d (%v), want above %d", site.ID, err, f.Site.ID)
	}
	air := 36.0
	res, err := dst.Ingest(ctx, []store.Reading{{PositionID: f.Position.ID, At: now.Add(-time.Minute), InternalAirC: &air}}, store.IngestOptions{})
	if err != nil || res.Inserted != 1 {
		t.Errorf("ingest into the restored copy: %+v %v", res, err)
	}
	t.Logf("%d tables, %d readings restored equal", len(tables), len(rows))
}

// tablesOf lists the schema's tables, a partitioned table once (its
// partitions are read through it).
func tablesOf(t *testing.T, st *store.Store, schema string) []string {
	t.Helper()
	var names []string
	err := st.DB(context.Background()).Raw(`SELECT c.relname FROM pg_class c JOIN pg_namespace n ON n.oid = c.relnamespace
		WHERE n.nspname = ? AND c.relkind IN ('r', 'p') AND NOT c.relispartition ORDER BY 1`, schema).Scan(&names).Error
	if err != nil {
		t.Fatal(err)
	}
	return names
}

// digest is a table's row count and an MD5 of its rows as text, in order.
func digest(t *testing.T, st *store.Store, table string) string {
	t.Helper()
	var out string
	err := st.DB(context.Background()).Raw(fmt.Sprintf(
		`SELECT count(*) || ':' || coalesce(md5(string_agg(r::text, '|' ORDER BY r::text)), '-') FROM %s r`,
		pgx.Identifier{table}.Sanitize())).Scan(&out).Error
	if err != nil {
		t.Fatalf("digest %s: %v", table, err)
	}
	return out
}
