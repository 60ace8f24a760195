// Package store owns kelvard's persistence: the GORM models of the register,
// queries, bulk ingest, the register's transactional operations (moving a
// drive, acknowledging a finding, completing a work order) shared by every
// front door, token checks and the migration runner.
//
// Two databases sit behind one behaviour: PostgreSQL, the production store,
// and an embedded pure-Go SQLite file for a first run with nothing
// installed. Both pass the same store tests.
package store

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"log/slog"
	"net/url"
	"strings"
	"time"

	"github.com/glebarez/sqlite"
	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"
	"github.com/jackc/pgx/v5/stdlib"
	"gorm.io/driver/postgres"
	"gorm.io/gorm"
)

// Dialect names the database behind a Store.
type Dialect string

// Supported dialects.
const (
	Postgres Dialect = "postgres"
	SQLite   Dialect = "sqlite"
)

// DefaultSQLitePath is the embedded database file used when no database URL
// is configured.
const DefaultSQLitePath = "kelvard.db"

// Store is kelvard's handle on its database. It is safe for concurrent use.
type Store struct {
	db      *gorm.DB
	sqlDB   *sql.DB
	dialect Dialect
	log     *slog.Logger
	now     func() time.Time
	ingest  ingestState // readings partitions known to exist, per-drive hints
	// scanGroupRows bounds a physical read of whole histories (0:
	// physicalGroupRows); tests lower it.
	scanGroupRows int
}

// The times the store keeps, in UTC: what RFC 3339 can write back (years
// 0000 to 9999, and an offset can carry a time written in one of them past
// either end) and PostgreSQL can read (it has no year 0). Readings, ranges
// and cursors outside them are refused where they come in.
var (
	EarliestTime = time.Date(1, 1, 1, 0, 0, 0, 0, time.UTC)
	LatestTime   = time.Date(9999, 12, 31, 23, 59, 59, 999999999, time.UTC)
)

// Options tunes Open. The zero value is usable.
type Options struct {
	// Logger receives slow-query and error logs; nil discards them.
	Logger *slog.Logger
	// MaxOpenConns caps the PostgreSQL pool (default 20).
	MaxOpenConns int
	// Now is the clock; nil means time.Now. Tests pin it.
	Now func() time.Time
}

// Open connects to the database named by rawURL: "postgres://..." or
// "postgresql://..." for PostgreSQL; "sqlite:PATH" or "" for the embedded
// SQLite file (./kelvard.db when empty). It does not run migrations.
func Open(ctx context.Context, rawURL string, opts Options) (*Store, error) {
	if opts.Logger == nil {
		opts.Logger = slog.New(slog.DiscardHandler)
	}
	if opts.Now == nil {
		opts.Now = time.Now
	}
	if opts.MaxOpenConns == 0 {
		opts.MaxOpenConns = 20
	}
	s := &Store{log: opts.Logger, now: func() time.Time { return opts.Now().UTC().Truncate(time.Microsecond) }}
	cfg := &gorm.Config{
		Logger:                 newGormLogger(opts.Logger),
		NowFunc:                s.now,
		TranslateError:         true,
		SkipDefaultTransaction: true,
		PrepareStmt:            false,
	}
	switch {
	case strings.HasPrefix(rawURL, "postgres://"), strings.HasPrefix(rawURL, "postgresql://"):
		sqlDB, err := openPostgres(rawURL)
		if err != nil {
			return nil, err
		}
		sqlDB.SetMaxOpenConns(opts.MaxOpenConns)
		sqlDB.SetMaxIdleConns(opts.MaxOpenConns)
		sqlDB.SetConnMaxIdleTime(5 * time.Minute)
		db, err := gorm.Open(postgres.New(postgres.Config{Conn: sqlDB}), cfg)
		if err != nil {
			sqlDB.Close()
			return nil, fmt.Errorf("open postgres: %w", err)
		}
		s.db, s.sqlDB, s.dialect = db, sqlDB, Postgres
	case rawURL == "", strings.HasPrefix(rawURL, "sqlite:"):
		path := strings.TrimPrefix(rawURL, "sqlite:")
		path = strings.TrimPrefix(path, "//")
		if path == "" {
			path = DefaultSQLitePath
		}
		db, err := gorm.Open(sqlite.Open(sqliteDSN(path)), cfg)
		if err != nil {
			return nil, fmt.Errorf("open sqlite %s: %w", path, err)
		}
		sqlDB, err := db.DB()
		if err != nil {
			return nil, fmt.Errorf("open sqlite %s: %w", path, err)
		}
		// One writer at a time is SQLite's rule; WAL lets readers go on
		// beside it. A small pool keeps readers concurrent.
		sqlDB.SetMaxOpenConns(4)
		s.db, s.sqlDB, s.dialect = db, sqlDB, SQLite
	default:
		return nil, fmt.Errorf("database URL %q: want postgres://…, postgresql://… or sqlite:PATH", redactURL(rawURL))
	}
	pingCtx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	if err := s.sqlDB.PingContext(pingCtx); err != nil {
		s.sqlDB.Close()
		return nil, fmt.Errorf("connect to %s database %s: %w", s.dialect, redactURL(rawURL), err)
	}
	return s, nil
}

// sqliteDSN turns a file path into a DSN with the pragmas kelvard relies
// on: foreign keys enforced, write-ahead logging, a busy timeout so writers
// wait instead of failing, and immediate transactions so a reader never has
// to upgrade to a writer mid-transaction.
func sqliteDSN(path string) string {
	q := url.Values{}
	q.Add("_pragma", "foreign_keys(1)")
	q.Add("_pragma", "journal_mode(WAL)")
	q.Add("_pragma", "busy_timeout(10000)")
	q.Add("_pragma", "synchronous(NORMAL)")
	// No _time_format: the driver's default already writes times as
	// "2006-01-02 15:04:05.999999999-07:00", and in this driver version
	// a _time_format option stops the options after it from being read,
	// which would drop _txlock.
	q.Set("_txlock", "immediate")
	return "file:" + path + "?" + q.Encode()
}

// openPostgres opens a database/sql pool on pgx that reads every timestamptz
// back in UTC, so both stores answer in UTC whatever the server's zone.
func openPostgres(rawURL string) (*sql.DB, error) {
	cc, err := pgx.ParseConfig(rawURL)
	if err != nil {
		return nil, fmt.Errorf("parse database URL %s: %w", redactURL(rawURL), err)
	}
	cc.RuntimeParams["timezone"] = "UTC"
	if cc.RuntimeParams["application_name"] == "" {
		cc.RuntimeParams["application_name"] = "kelvard"
	}
	return stdlib.OpenDB(*cc, stdlib.OptionAfterConnect(func(_ context.Context, c *pgx.Conn) error {
		c.TypeMap().RegisterType(&pgtype.Type{
			Name:  "timestamptz",
			OID:   pgtype.TimestamptzOID,
			Codec: &pgtype.TimestamptzCodec{ScanLocation: time.UTC},
		})
		return nil
	})), nil
}

// redactURL hides a password in a database URL for error messages.
func redactURL(raw string) string {
	u, err := url.Parse(raw)
	if err != nil || u.User == nil {
		return raw
	}
	return u.Redacted()
}

// Dialect reports which database the store uses.
func (s *Store) Dialect() Dialect { return s.dialect }

// DB returns the GORM handle bound to ctx, for packages inside store and for
// tests. Other packages use the Store's methods.
func (s *Store) DB(ctx context.Context) *gorm.DB { return s.db.WithContext(ctx) }

// SQL returns the underlying database/sql pool.
func (s *Store) SQL() *sql.DB { return s.sqlDB }

// Now returns the store's clock reading in UTC.
func (s *Store) Now() time.Time { return s.now() }

// Ping checks that the database answers.
func (s *Store) Ping(ctx context.Context) error {
	if err := s.sqlDB.PingContext(ctx); err != nil {
		return fmt.Errorf("ping %s: %w", s.dialect, err)
	}
	return nil
}

// Close releases the connection pool.
func (s *Store) Close() error { return s.sqlDB.Close() }

// tx runs fn in a transaction. On PostgreSQL a serialization failure or
// deadlock is retried a few times; any other error rolls back.
func (s *Store) tx(ctx context.Context, fn func(tx *gorm.DB) error) error {
	var err error
	for attempt := 0; attempt < 4; attempt++ {
		err = s.db.WithContext(ctx).Transaction(fn)
		if err == nil || !retryable(err) {
			return err
		}
	}
	return err
}

// errNoRows reports whether err means a query found nothing.
func errNoRows(err error) bool {
	return errors.Is(err, gorm.ErrRecordNotFound) || errors.Is(err, sql.ErrNoRows)
}
