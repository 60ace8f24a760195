package store

import (
	"context"
	"database/sql"
	"database/sql/driver"
	"errors"
	"fmt"

	"github.com/glebarez/sqlite"
)

// SQLite transactions must begin IMMEDIATE: a deferred transaction takes
// the write lock only at its first write, and when another connection has
// written since the transaction's first read, that upgrade fails at once
// with "database is locked" (SQLITE_BUSY) without waiting out the busy
// timeout, so concurrent writers such as two readings posts answered 500.
// sqliteDSN asks for immediate transactions with _txlock=immediate, but the
// driver (glebarez/go-sqlite v1.21.2) stops reading its query parameters
// after _time_format and so never applies _txlock. The connector below
// begins every read-write transaction with BEGIN IMMEDIATE itself; read-only
// transactions keep a plain BEGIN.

// openSQLiteDB opens a database/sql pool on the SQLite driver whose
// read-write transactions begin IMMEDIATE.
func openSQLiteDB(dsn string) (*sql.DB, error) {
	// The driver is registered under sqlite.DriverName; sql.Open only
	// looks it up, it connects nothing.
	probe, err := sql.Open(sqlite.DriverName, dsn)
	if err != nil {
		return nil, fmt.Errorf("sqlite driver: %w", err)
	}
	drv := probe.Driver()
	probe.Close()
	return sql.OpenDB(immediateConnector{dsn: dsn, drv: drv}), nil
}

// immediateConnector opens connections of the wrapped driver as
// immediateConns.
type immediateConnector struct {
	dsn string
	drv driver.Driver
}

func (c immediateConnector) Connect(context.Context) (driver.Conn, error) {
	conn, err := c.drv.Open(c.dsn)
	if err != nil {
		return nil, err
	}
	ic := &immediateConn{Conn: conn}
	var ok bool
	if ic.exec, ok = conn.(driver.ExecerContext); !ok {
		conn.Close()
		return nil, errors.New("sqlite driver connection cannot execute statements with a context")
	}
	ic.query, _ = conn.(driver.QueryerContext)
	ic.prepare, _ = conn.(driver.ConnPrepareContext)
	ic.pinger, _ = conn.(driver.Pinger)
	return ic, nil
}

func (c immediateConnector) Driver() driver.Driver { return c.drv }

// immediateConn is a driver connection whose read-write transactions begin
// IMMEDIATE. It passes the optional interfaces of the wrapped connection
// on, so database/sql uses the same paths as without it.
type immediateConn struct {
	driver.Conn
	exec    driver.ExecerContext
	query   driver.QueryerContext
	prepare driver.ConnPrepareContext
	pinger  driver.Pinger
}

// BeginTx implements driver.ConnBeginTx.
func (c *immediateConn) BeginTx(ctx context.Context, opts driver.TxOptions) (driver.Tx, error) {
	begin := "BEGIN IMMEDIATE"
	if opts.ReadOnly {
		begin = "BEGIN"
	}
	if _, err := c.exec.ExecContext(ctx, begin, nil); err != nil {
		return nil, err
	}
	return immediateTx{c}, nil
}

// Begin implements driver.Conn.
func (c *immediateConn) Begin() (driver.Tx, error) {
	return c.BeginTx(context.Background(), driver.TxOptions{})
}

// ExecContext implements driver.ExecerContext.
func (c *immediateConn) ExecContext(ctx context.Context, query string, args []driver.NamedValue) (driver.Result, error) {
	return c.exec.ExecContext(ctx, query, args)
}

// QueryContext implements driver.QueryerContext.
func (c *immediateConn) QueryContext(ctx context.Context, query string, args []driver.NamedValue) (driver.Rows, error) {
	if c.query == nil {
		return nil, driver.ErrSkip
	}
	return c.query.QueryContext(ctx, query, args)
}

// PrepareContext implements driver.ConnPrepareContext.
func (c *immediateConn) PrepareContext(ctx context.Context, query string) (driver.Stmt, error) {
	if c.prepare == nil {
		return c.Conn.Prepare(query)
	}
	return c.prepare.PrepareContext(ctx, query)
}

// Ping implements driver.Pinger.
func (c *immediateConn) Ping(ctx context.Context) error {
	if c.pinger == nil {
		return nil
	}
	return c.pinger.Ping(ctx)
}

// immediateTx ends a transaction begun by immediateConn.BeginTx.
type immediateTx struct{ c *immediateConn }

func (t immediateTx) Commit() error {
	_, err := t.c.exec.ExecContext(context.Background(), "COMMIT", nil)
	return err
}

func (t immediateTx) Rollback() error {
	_, err := t.c.exec.ExecContext(context.Background(), "ROLLBACK", nil)
	return err
}
