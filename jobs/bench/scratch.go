package bench

import (
	"context"
	"crypto/rand"
	"database/sql"
	"encoding/hex"
	"fmt"
	"time"
)

// scratch is the benchmark's scratch schemas in the database it was given,
// made fresh for one run and dropped by drop.
type scratch struct {
	// admin is a connection pool on the database itself (no schema).
	admin   *sql.DB
	schemas map[string]string // by the caller's name
	urls    map[string]string // database URLs with search_path set, by name
}

// openScratch connects to the database at rawURL, checks that it answers,
// and makes one schema per name, called prefix_TAG_name with a random tag
// so concurrent runs do not meet. On an error nothing is left behind.
func openScratch(ctx context.Context, rawURL, prefix string, names ...string) (*scratch, error) {
	admin, err := sql.Open("pgx", rawURL)
	if err != nil {
		return nil, fmt.Errorf("open %s: %w", redact(rawURL), err)
	}
	if err := admin.PingContext(ctx); err != nil {
		admin.Close()
		return nil, fmt.Errorf("connect to %s: %w", redact(rawURL), err)
	}
	tag := make([]byte, 4)
	rand.Read(tag)
	s := &scratch{admin: admin, schemas: map[string]string{}, urls: map[string]string{}}
	for _, n := range names {
		schema := prefix + "_" + hex.EncodeToString(tag) + "_" + n
		if _, err := admin.ExecContext(ctx, "CREATE SCHEMA "+schema); err != nil {
			s.drop(func(string, ...any) {})
			return nil, fmt.Errorf("create scratch schema: %w", err)
		}
		s.schemas[n] = schema
		if s.urls[n], err = schemaURL(rawURL, schema); err != nil {
			s.drop(func(string, ...any) {})
			return nil, err
		}
	}
	return s, nil
}

// drop drops the schemas, telling say of any it could not, and closes the
// connection pool. It runs even when the run's context is cancelled.
func (s *scratch) drop(say func(format string, args ...any)) {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	for _, schema := range s.schemas {
		if _, err := s.admin.ExecContext(ctx, "DROP SCHEMA IF EXISTS "+schema+" CASCADE"); err != nil {
			say("drop scratch schema %s: %v", schema, err)
		}
	}
	s.admin.Close()
}
