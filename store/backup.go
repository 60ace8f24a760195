package store

import (
	"context"
	"errors"
	"fmt"
	"os"
)

// ErrBackupNeedsPgDump says that a PostgreSQL store is backed up with the
// database's own tools, not by kelvard.
var ErrBackupNeedsPgDump = errors.New("a PostgreSQL store is backed up with pg_dump -Fc and restored with pg_restore (see README, Backup and restore)")

// BackupTo writes a consistent copy of an embedded SQLite store to path,
// which must not exist yet, while the store stays in use: SQLite's VACUUM
// INTO reads one snapshot inside a read transaction, so writers carry on
// (WAL mode) and the copy holds every committed transaction up to the
// moment it started and nothing half-written. The copy is a plain SQLite
// file that kelvard opens with KELVARD_DATABASE_URL=sqlite:PATH. On
// PostgreSQL it answers ErrBackupNeedsPgDump.
func (s *Store) BackupTo(ctx context.Context, path string) error {
	if s.dialect != SQLite {
		return ErrBackupNeedsPgDump
	}
	if path == "" {
		return errors.New("backup: no file given")
	}
	if _, err := os.Stat(path); err == nil {
		return fmt.Errorf("backup: %s already exists; choose a new file", path)
	} else if !errors.Is(err, os.ErrNotExist) {
		return fmt.Errorf("backup: %w", err)
	}
	if err := s.db.WithContext(ctx).Exec("VACUUM INTO ?", path).Error; err != nil {
		return fmt.Errorf("backup to %s: %w", path, translate(err))
	}
	return nil
}
