// Package migrations holds kelvard's versioned SQL migrations, one folder
// per dialect, embedded in the binary. The store package runs them with
// goose; see DEVELOPERS.md for how to add one.
package migrations

import (
	"embed"
	"io/fs"
)

//go:embed postgres/*.sql sqlite/*.sql
var files embed.FS

// Postgres returns the PostgreSQL migrations.
func Postgres() fs.FS { return sub("postgres") }

// SQLite returns the SQLite migrations.
func SQLite() fs.FS { return sub("sqlite") }

func sub(dir string) fs.FS {
	f, err := fs.Sub(files, dir)
	if err != nil {
		// fs.Sub fails only for an invalid path, and dir is a constant.
		panic(err)
	}
	return f
}
