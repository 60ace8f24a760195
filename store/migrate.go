package store

import (
	"context"
	"fmt"
	"hash/fnv"
	"io/fs"

	"github.com/pressly/goose/v3"
	"github.com/pressly/goose/v3/lock"

	"kelvard/migrations"
)

// migrationLockID returns the PostgreSQL advisory lock key held while
// migrations run, so that replicas starting together apply each migration
// once. The key is derived from the schema, so separate kelvard schemas in
// one database (tests, say) do not wait for each other.
func (s *Store) migrationLockID(ctx context.Context) (int64, error) {
	var schema string
	if err := s.sqlDB.QueryRowContext(ctx, "SELECT current_schema()").Scan(&schema); err != nil {
		return 0, fmt.Errorf("read current schema: %w", err)
	}
	h := fnv.New64a()
	h.Write([]byte("kelvard migrations " + schema))
	return int64(h.Sum64() >> 1), nil
}

// provider builds a goose provider for the store's dialect over the
// embedded migration files.
func (s *Store) provider(ctx context.Context) (*goose.Provider, error) {
	var (
		dialect goose.Dialect
		fsys    fs.FS
		opts    []goose.ProviderOption
	)
	switch s.dialect {
	case Postgres:
		dialect, fsys = goose.DialectPostgres, migrations.Postgres()
		id, err := s.migrationLockID(ctx)
		if err != nil {
			return nil, err
		}
		// Poll the lock every second for up to ten minutes.
		locker, err := lock.NewPostgresSessionLocker(lock.WithLockID(id), lock.WithLockTimeout(1, 600))
		if err != nil {
			return nil, fmt.Errorf("migration lock: %w", err)
		}
		opts = append(opts, goose.WithSessionLocker(locker))
	case SQLite:
		dialect, fsys = goose.DialectSQLite3, migrations.SQLite()
	default:
		return nil, fmt.Errorf("no migrations for dialect %q", s.dialect)
	}
	p, err := goose.NewProvider(dialect, s.sqlDB, fsys, opts...)
	if err != nil {
		return nil, fmt.Errorf("load migrations: %w", err)
	}
	return p, nil
}

// Migrate applies every pending migration and returns the schema version
// reached. On PostgreSQL it holds an advisory lock while it runs, so
// replicas that start together never race.
func (s *Store) Migrate(ctx context.Context) (int64, error) {
	p, err := s.provider(ctx)
	if err != nil {
		return 0, err
	}
	if _, err := p.Up(ctx); err != nil {
		return 0, fmt.Errorf("apply migrations: %w", err)
	}
	v, err := p.GetDBVersion(ctx)
	if err != nil {
		return 0, fmt.Errorf("read schema version: %w", err)
	}
	return v, nil
}

// MigrationsCurrent reports whether every embedded migration has been
// applied.
func (s *Store) MigrationsCurrent(ctx context.Context) (bool, error) {
	p, err := s.provider(ctx)
	if err != nil {
		return false, err
	}
	pending, err := p.HasPending(ctx)
	if err != nil {
		return false, fmt.Errorf("check migrations: %w", err)
	}
	return !pending, nil
}
