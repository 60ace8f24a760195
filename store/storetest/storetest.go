// Package storetest opens fresh, migrated stores for tests: a schema of its
// own on the test PostgreSQL server, or a SQLite file in a temporary
// folder, so tests run in parallel without seeing each other's rows.
//
// PostgreSQL is found at KELVARD_TEST_DATABASE_URL (default
// postgres://postgres@127.0.0.1:5432/test). When it cannot be reached the
// PostgreSQL tests skip with the reason, unless KELVARD_TEST_REQUIRE_POSTGRES
// is set (CI sets it), in which case they fail. RequireTool does the same
// for the commands some tests run (chromium, promtool, pg_dump) with
// KELVARD_TEST_REQUIRE_TOOLS.
package storetest

import (
	"context"
	"crypto/rand"
	"database/sql"
	"encoding/hex"
	"net/url"
	"os"
	"path/filepath"
	"testing"
	"time"

	_ "github.com/jackc/pgx/v5/stdlib" // database/sql driver "pgx" for schema setup

	"kelvard/store"
)

// DefaultPostgresURL is the test server when KELVARD_TEST_DATABASE_URL is
// not set.
const DefaultPostgresURL = "postgres://postgres@127.0.0.1:5432/test?sslmode=disable"

// Dialects lists the stores every store test runs against.
var Dialects = []store.Dialect{store.Postgres, store.SQLite}

// PostgresURL returns the test server's URL.
func PostgresURL() string {
	if u := os.Getenv("KELVARD_TEST_DATABASE_URL"); u != "" {
		return u
	}
	return DefaultPostgresURL
}

// RequirePostgres reports whether PostgreSQL tests must run (CI).
func RequirePostgres() bool { return os.Getenv("KELVARD_TEST_REQUIRE_POSTGRES") != "" }

// URL returns the database URL of a fresh, empty database for the test:
// a new schema on PostgreSQL (dropped when the test ends) or a new file on
// SQLite. It skips or fails the test when PostgreSQL cannot be reached.
func URL(t testing.TB, d store.Dialect) string {
	t.Helper()
	switch d {
	case store.SQLite:
		return "sqlite:" + filepath.Join(t.TempDir(), "kelvard.db")
	case store.Postgres:
		base := PostgresURL()
		db, err := sql.Open("pgx", base)
		if err != nil {
			unreachable(t, err)
		}
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		defer cancel()
		if err := db.PingContext(ctx); err != nil {
			db.Close()
			unreachable(t, err)
		}
		schema := "t_" + randomHex(8)
		if _, err := db.ExecContext(ctx, "CREATE SCHEMA "+schema); err != nil {
			db.Close()
			t.Fatalf("create schema: %v", err)
		}
		t.Cleanup(func() {
			ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
			defer cancel()
			if _, err := db.ExecContext(ctx, "DROP SCHEMA "+schema+" CASCADE"); err != nil {
				t.Logf("drop schema %s: %v", schema, err)
			}
			db.Close()
		})
		u, err := url.Parse(base)
		if err != nil {
			t.Fatalf("parse %s: %v", base, err)
		}
		q := u.Query()
		q.Set("search_path", schema)
		u.RawQuery = q.Encode()
		return u.String()
	}
	t.Fatalf("unknown dialect %q", d)
	return ""
}

// Open returns a fresh, migrated store for the test, closed when it ends.
func Open(t testing.TB, d store.Dialect) *store.Store {
	t.Helper()
	return OpenWith(t, d, store.Options{})
}

// OpenWith is Open with options (a pinned clock, say).
func OpenWith(t testing.TB, d store.Dialect, opts store.Options) *store.Store {
	t.Helper()
	return openURL(t, URL(t, d), opts)
}

// OpenCut returns a fresh, migrated PostgreSQL store that reaches the
// database through a CutProxy, and the proxy, so the test can cut the
// connection under the store and restore it.
func OpenCut(t testing.TB) (*store.Store, *CutProxy) {
	t.Helper()
	proxy, u := NewCutProxy(t, URL(t, store.Postgres))
	return openURL(t, u, store.Options{}), proxy
}

// openURL opens and migrates the store at u, closed when the test ends.
func openURL(t testing.TB, u string, opts store.Options) *store.Store {
	t.Helper()
	ctx := context.Background()
	s, err := store.Open(ctx, u, opts)
	if err != nil {
		t.Fatalf("open store: %v", err)
	}
	t.Cleanup(func() { s.Close() })
	if _, err := s.Migrate(ctx); err != nil {
		t.Fatalf("migrate store: %v", err)
	}
	return s
}

func unreachable(t testing.TB, err error) {
	t.Helper()
	if RequirePostgres() {
		t.Fatalf("PostgreSQL at %s is required (KELVARD_TEST_REQUIRE_POSTGRES is set) but unreachable: %v", PostgresURL(), err)
	}
	t.Skipf("PostgreSQL at %s unreachable, skipping (set KELVARD_TEST_REQUIRE_POSTGRES=1 to fail instead): %v", PostgresURL(), err)
}

func randomHex(n int) string {
	b := make([]byte, n)
	if _, err := rand.Read(b); err != nil {
		panic(err)
	}
	return hex.EncodeToString(b)
}
