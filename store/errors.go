package store

import (
	"database/sql/driver"
	"errors"
	"fmt"
	"io"
	"net"
	"sort"
	"strings"
	"syscall"

	"github.com/jackc/pgx/v5/pgconn"
	"gorm.io/gorm"
)

// Errors the store returns, matched with errors.Is. The api package maps
// them to HTTP statuses.
var (
	// ErrNotFound: no such object, or the caller's site limit hides it.
	ErrNotFound = errors.New("not found")
	// ErrReferenced: the object cannot be deleted while others refer to it.
	ErrReferenced = errors.New("still referenced")
	// ErrDuplicate: a unique key (a name, a tag, a serial) is taken.
	ErrDuplicate = errors.New("already exists")
	// ErrUnavailable: the database cannot be reached right now.
	ErrUnavailable = errors.New("database unavailable")
)

// FieldError names one bad input field. Row is the 1-based data row of a
// batch (0 when the input is a single object); Line is the line in a CSV
// file when known.
type FieldError struct {
	Field  string `json:"field"`
	Row    int    `json:"row,omitempty"`
	Line   int    `json:"line,omitempty"`
	Reason string `json:"reason"`
}

func (e FieldError) String() string {
	where := e.Field
	if e.Row > 0 {
		where = fmt.Sprintf("row %d: %s", e.Row, e.Field)
	}
	if e.Line > 0 {
		where = fmt.Sprintf("line %d: %s", e.Line, e.Field)
	}
	return where + ": " + e.Reason
}

// ValidationError lists every bad field of an input; nothing was written.
type ValidationError struct {
	Fields []FieldError
}

// Error lists the first errorListLimit field errors and counts the rest:
// a file with every row wrong would otherwise make one line of megabytes
// in a log or on a terminal. Fields keeps them all (the API answers with
// every one).
func (e *ValidationError) Error() string {
	n := min(len(e.Fields), errorListLimit)
	parts := make([]string, n)
	for i, f := range e.Fields[:n] {
		parts[i] = f.String()
	}
	msg := "invalid input: " + strings.Join(parts, "; ")
	if more := len(e.Fields) - n; more > 0 {
		msg += fmt.Sprintf("; and %d more", more)
	}
	return msg
}

// errorListLimit is how many field errors ValidationError.Error lists.
const errorListLimit = 20

// fieldErrors collects field errors while validating one object.
type fieldErrors []FieldError

func (fe *fieldErrors) add(field, format string, args ...any) {
	*fe = append(*fe, FieldError{Field: field, Reason: fmt.Sprintf(format, args...)})
}

// addMap adds one error per entry of m, each field prefixed with prefix.
func (fe *fieldErrors) addMap(prefix string, m map[string]string) {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		fe.add(prefix+k, "%s", m[k])
	}
}

// err returns nil when there are no errors, else a *ValidationError.
func (fe fieldErrors) err() error {
	if len(fe) == 0 {
		return nil
	}
	return &ValidationError{Fields: fe}
}

// Invalid builds a ValidationError for a single field, for callers outside
// the package that find a problem before the store sees the input.
func Invalid(field, format string, args ...any) error {
	return &ValidationError{Fields: []FieldError{{Field: field, Reason: fmt.Sprintf(format, args...)}}}
}

// translate maps driver errors to the store's errors, keeping the original
// in the chain for logs.
func translate(err error) error {
	switch {
	case err == nil:
		return nil
	case errors.Is(err, gorm.ErrDuplicatedKey):
		return fmt.Errorf("%w: %w", ErrDuplicate, err)
	case errors.Is(err, gorm.ErrForeignKeyViolated):
		return fmt.Errorf("%w: %w", ErrReferenced, err)
	case errNoRows(err):
		return fmt.Errorf("%w: %w", ErrNotFound, err)
	}
	var pgErr *pgconn.PgError
	if errors.As(err, &pgErr) {
		switch pgErr.Code {
		case "23505":
			return fmt.Errorf("%w: %w", ErrDuplicate, err)
		case "23503":
			return fmt.Errorf("%w: %w", ErrReferenced, err)
		case "57P01", "57P02", "57P03", "08000", "08003", "08006", "08001", "08004":
			return fmt.Errorf("%w: %w", ErrUnavailable, err)
		case "22021", "22P05":
			// A NUL character or bytes that are not UTF-8 reached a text
			// value: bad input that a check upstream let through.
			return fmt.Errorf("%w: %w", &ValidationError{Fields: []FieldError{{Field: "text", Reason: "a value " + BadTextReason}}}, err)
		}
	}
	if isConnError(err) {
		return fmt.Errorf("%w: %w", ErrUnavailable, err)
	}
	return err
}

// retryable reports whether a transaction failed for a reason that a retry
// can cure (serialization failure or deadlock on PostgreSQL).
func retryable(err error) bool {
	var pgErr *pgconn.PgError
	if errors.As(err, &pgErr) {
		return pgErr.Code == "40001" || pgErr.Code == "40P01"
	}
	return false
}

// isConnError reports whether err looks like a lost or refused connection:
// a failed connect, a network error, or a connection cut short in the
// middle of a message (the server went away abruptly).
func isConnError(err error) bool {
	var (
		ce *pgconn.ConnectError
		oe *net.OpError
	)
	if errors.As(err, &ce) || errors.As(err, &oe) || errors.Is(err, io.ErrUnexpectedEOF) || errors.Is(err, driver.ErrBadConn) ||
		errors.Is(err, syscall.ECONNRESET) || errors.Is(err, syscall.ECONNREFUSED) || errors.Is(err, syscall.EPIPE) {
		return true
	}
	msg := err.Error()
	for _, s := range []string{"connection refused", "broken pipe", "connection reset", "bad connection", "server closed the connection",
		"conn closed", "failed to connect", "unexpected EOF"} {
		if strings.Contains(msg, s) {
			return true
		}
	}
	return false
}
