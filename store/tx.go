package store

import (
	"context"
	"fmt"

	"gorm.io/gorm"
)

// Tx is one database transaction that a caller outside the package holds
// open across several register operations: the CSV importer applies a whole
// file in one, so a bad row leaves nothing written. The operations on a Tx
// (CreateIn, UpdateIn, GetIn, ListIn, Tx.MoveDrive) share their validation,
// site limits and audit with the Store's public functions. A Tx is valid
// only inside the function given to Store.InTx.
type Tx struct {
	db      *gorm.DB
	dialect Dialect
}

// InTx runs fn in one transaction: it commits when fn returns nil and rolls
// back when fn returns an error. On PostgreSQL a serialization failure or a
// deadlock runs fn again from the start, so fn must not keep state from an
// earlier attempt.
func (s *Store) InTx(ctx context.Context, fn func(tx *Tx) error) error {
	return s.tx(ctx, func(db *gorm.DB) error { return fn(&Tx{db: db, dialect: s.dialect}) })
}

// Savepoint runs fn inside a savepoint of the transaction. When fn returns
// an error, its writes are undone and the transaction goes on (on
// PostgreSQL a failed statement would otherwise spoil the whole
// transaction), so one bad row need not spoil the rest.
func (t *Tx) Savepoint(fn func(tx *Tx) error) error {
	return t.db.Transaction(func(db *gorm.DB) error { return fn(&Tx{db: db, dialect: t.dialect}) })
}

// CreateIn is Create inside the caller's transaction.
func CreateIn[T any, P Record[T]](ctx context.Context, tx *Tx, apply func(*T) error) (T, error) {
	v, err := newRecord[T, P](apply)
	if err != nil {
		return v, err
	}
	if err := insert[T, P](ctx, tx.db, &v); err != nil {
		return v, fmt.Errorf("create %s: %w", Info[T, P]().Name, err)
	}
	return v, nil
}

// UpdateIn is Update inside the caller's transaction, except that an object
// apply leaves as it was is neither saved nor audited: changed reports
// whether anything was written.
func UpdateIn[T any, P Record[T]](ctx context.Context, tx *Tx, id int64, apply func(*T) error) (v T, changed bool, err error) {
	v, changed, err = update[T, P](ctx, tx.db, tx.dialect, id, apply, true)
	if err != nil {
		return v, false, fmt.Errorf("update %s %d: %w", Info[T, P]().Name, id, err)
	}
	return v, changed, nil
}

// GetIn is Get inside the caller's transaction.
func GetIn[T any, P Record[T]](ctx context.Context, tx *Tx, id int64) (T, error) {
	return get[T, P](ctx, tx.db, id)
}

// ListIn is List inside the caller's transaction.
func ListIn[T any, P Record[T]](ctx context.Context, tx *Tx, lq ListQuery) (Page[T], error) {
	return list[T, P](ctx, tx.db, lq)
}

// MoveDrive is Store.MoveDrive inside the caller's transaction.
func (t *Tx) MoveDrive(ctx context.Context, driveID int64, m Move) (MoveResult, error) {
	res, err := moveDrive(ctx, t.db, t.dialect, driveID, m)
	if err != nil {
		return MoveResult{}, fmt.Errorf("move drive %d: %w", driveID, err)
	}
	return res, nil
}
