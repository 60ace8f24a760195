package store

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"time"

	"gorm.io/gorm"
	"gorm.io/gorm/clause"
)

var forUpdate = clause.Locking{Strength: "UPDATE"}

// Record is the constraint the generic register operations take: a pointer
// to one of the register's models.
type Record[T any] interface {
	*T
	record
}

// Info returns the collection description of model T.
func Info[T any, P Record[T]]() *ResourceInfo {
	var zero T
	return P(&zero).info()
}

// Page is one page of a list: the items and the opaque cursor of the next
// page ("" on the last page).
type Page[T any] struct {
	Items []T    `json:"items"`
	Next  string `json:"next_cursor,omitempty"`
}

// ListQuery selects a page of a collection. Filters holds the query
// parameters named in the collection's ResourceInfo; unknown keys are
// ignored here (the api rejects them first).
type ListQuery struct {
	Filters map[string]string
	Limit   int
	Cursor  string
}

// Default and maximum page sizes.
const (
	DefaultLimit = 50
	MaxLimit     = 1000
)

// cursor is the decoded form of an opaque page cursor: list keyset paging
// by id.
type cursor struct {
	After int64 `json:"a"`
}

// EncodeCursor makes the opaque cursor that continues after id.
func EncodeCursor(after int64) string {
	b, _ := json.Marshal(cursor{After: after})
	return base64.RawURLEncoding.EncodeToString(b)
}

// DecodeCursor reads a cursor made by EncodeCursor.
func DecodeCursor(s string) (int64, error) {
	if s == "" {
		return 0, nil
	}
	b, err := base64.RawURLEncoding.DecodeString(s)
	if err != nil || len(b) > 64 {
		return 0, Invalid("cursor", "is not a cursor this server issued")
	}
	var c cursor
	if err := json.Unmarshal(b, &c); err != nil || c.After < 0 {
		return 0, Invalid("cursor", "is not a cursor this server issued")
	}
	return c.After, nil
}

// scoped limits q to the principal's sites when the collection is
// site-bound.
func scoped(ctx context.Context, q *gorm.DB, info *ResourceInfo) *gorm.DB {
	if p := PrincipalFrom(ctx); !p.AllSites() && info.scope != "" {
		return q.Where(info.scope, p.Sites)
	}
	return q
}

// applyFilters adds the list filters to q, checking each value.
func applyFilters(q *gorm.DB, info *ResourceInfo, values map[string]string) (*gorm.DB, error) {
	var fe fieldErrors
	for _, f := range info.Filters {
		v, ok := values[f.Param]
		if !ok || v == "" {
			continue
		}
		switch f.Kind {
		case FilterID:
			id, err := strconv.ParseInt(v, 10, 64)
			if err != nil || id <= 0 {
				fe.add(f.Param, "must be a positive integer id")
				continue
			}
			q = q.Where(f.Column+" = ?", id)
		case FilterText:
			if len(v) > 200 {
				fe.add(f.Param, "must be at most 200 characters")
				continue
			}
			if !GoodText(v) {
				fe.add(f.Param, "%s", BadTextReason)
				continue
			}
			q = q.Where(f.Column+" = ?", v)
		case FilterEnum:
			if !hasField(f.Values, v) {
				fe.add(f.Param, "must be one of %v", f.Values)
				continue
			}
			q = q.Where(f.Column+" = ?", v)
		case FilterFrom, FilterTo:
			t, err := time.Parse(time.RFC3339Nano, v)
			if err != nil {
				fe.add(f.Param, "must be an RFC 3339 time such as 2026-01-31T00:00:00Z")
				continue
			}
			op := " >= ?"
			if f.Kind == FilterTo {
				op = " < ?"
			}
			q = q.Where(f.Column+op, utc(t))
		}
	}
	return q, fe.err()
}

// List returns one page of collection T, ordered by id, honouring the
// principal's site limit.
func List[T any, P Record[T]](ctx context.Context, s *Store, lq ListQuery) (Page[T], error) {
	return list[T, P](ctx, s.db.WithContext(ctx), lq)
}

func list[T any, P Record[T]](ctx context.Context, db *gorm.DB, lq ListQuery) (Page[T], error) {
	info := Info[T, P]()
	after, err := DecodeCursor(lq.Cursor)
	if err != nil {
		return Page[T]{}, err
	}
	limit := lq.Limit
	if limit <= 0 {
		limit = DefaultLimit
	}
	if limit > MaxLimit {
		return Page[T]{}, Invalid("limit", "must be at most %d", MaxLimit)
	}
	q := scoped(ctx, db.Model(new(T)), info)
	if q, err = applyFilters(q, info, lq.Filters); err != nil {
		return Page[T]{}, err
	}
	items := make([]T, 0, min(limit+1, 256))
	if err := q.Where("id > ?", after).Order("id").Limit(limit + 1).Find(&items).Error; err != nil {
		return Page[T]{}, fmt.Errorf("list %s: %w", info.Name, translate(err))
	}
	page := Page[T]{Items: items}
	if len(items) > limit {
		page.Items = items[:limit]
		page.Next = EncodeCursor(P(&page.Items[limit-1]).Key())
	}
	return page, nil
}

// Get loads one object of collection T by id; ErrNotFound when it does not
// exist or lies outside the principal's sites.
func Get[T any, P Record[T]](ctx context.Context, s *Store, id int64) (T, error) {
	return get[T, P](ctx, s.db.WithContext(ctx), id)
}

func get[T any, P Record[T]](ctx context.Context, tx *gorm.DB, id int64) (T, error) {
	info := Info[T, P]()
	var v T
	err := scoped(ctx, tx.Model(new(T)), info).Where("id = ?", id).Take(&v).Error
	if errNoRows(err) {
		return v, fmt.Errorf("%s %d: %w", info.Name, id, ErrNotFound)
	}
	if err != nil {
		return v, fmt.Errorf("load %s %d: %w", info.Name, id, translate(err))
	}
	return v, nil
}

// Create inserts a new object of collection T. apply fills the fields over
// the collection's defaults (the api decodes the request body there). The
// object is validated, inserted and audited in one transaction.
func Create[T any, P Record[T]](ctx context.Context, s *Store, apply func(*T) error) (T, error) {
	info := Info[T, P]()
	v, err := newRecord[T, P](apply)
	if err != nil {
		return v, err
	}
	err = s.tx(ctx, func(tx *gorm.DB) error { return insert[T, P](ctx, tx, &v) })
	if err != nil {
		return v, fmt.Errorf("create %s: %w", info.Name, err)
	}
	return v, nil
}

// newRecord makes a new object of collection T: its defaults, then apply.
func newRecord[T any, P Record[T]](apply func(*T) error) (T, error) {
	var v T
	if c, ok := any(P(&v)).(creator); ok {
		c.defaults()
	}
	if err := apply(&v); err != nil {
		return v, err
	}
	return v, nil
}

// insert prepares, validates, inserts and audits v inside tx.
func insert[T any, P Record[T]](ctx context.Context, tx *gorm.DB, v *T) error {
	p := P(v)
	if err := p.prepare(ctx, tx); err != nil {
		return err
	}
	if err := p.validate(ctx, tx); err != nil {
		return err
	}
	if fe := textProblems(p); len(fe) > 0 {
		return &ValidationError{Fields: fe}
	}
	if err := tx.Create(p).Error; err != nil {
		return translate(err)
	}
	if c, ok := any(p).(creator); ok {
		if err := c.afterCreate(ctx, tx); err != nil {
			return err
		}
	}
	if err := markAffected(tx, p); err != nil {
		return err
	}
	return writeAudit(ctx, tx, "create", p.info().Name, p.Key(), nil, p)
}

// Update loads object id of collection T, lets apply change it (the api
// decodes a PATCH body there), validates and saves it, and audits the
// change, all in one transaction. Identity and timestamps cannot change.
func Update[T any, P Record[T]](ctx context.Context, s *Store, id int64, apply func(*T) error) (T, error) {
	info := Info[T, P]()
	var out T
	err := s.tx(ctx, func(tx *gorm.DB) error {
		var err error
		out, _, err = update[T, P](ctx, tx, s.dialect, id, apply, false)
		return err
	})
	if err != nil {
		return out, fmt.Errorf("update %s %d: %w", info.Name, id, err)
	}
	return out, nil
}

// update is Update inside tx. With skipUnchanged, an object that apply and
// prepare leave as it was is neither saved nor audited, and changed is
// false.
func update[T any, P Record[T]](ctx context.Context, tx *gorm.DB, d Dialect, id int64, apply func(*T) error, skipUnchanged bool) (out T, changed bool, err error) {
	info := Info[T, P]()
	v, err := get[T, P](ctx, lockRow(tx, d), id)
	if err != nil {
		return out, false, err
	}
	before := v
	if err := apply(&v); err != nil {
		return out, false, err
	}
	p := P(&v)
	if p.Key() != id {
		return out, false, Invalid("id", "cannot change")
	}
	if err := p.prepare(ctx, tx); err != nil {
		return out, false, err
	}
	if err := p.validate(ctx, tx); err != nil {
		return out, false, err
	}
	if fe := textProblems(p); len(fe) > 0 {
		return out, false, &ValidationError{Fields: fe}
	}
	if skipUnchanged {
		same, err := sameJSON(&before, p)
		if err != nil {
			return out, false, fmt.Errorf("compare %s %d: %w", info.Name, id, err)
		}
		if same {
			return before, false, nil
		}
	}
	if err := tx.Save(p).Error; err != nil {
		return out, false, translate(err)
	}
	if err := markAffected(tx, p); err != nil {
		return out, false, err
	}
	return v, true, writeAudit(ctx, tx, "update", info.Name, id, &before, p)
}

// sameJSON reports whether a and b encode to the same JSON: the audit log's
// view of whether an object changed.
func sameJSON(a, b any) (bool, error) {
	ja, err := json.Marshal(a)
	if err != nil {
		return false, err
	}
	jb, err := json.Marshal(b)
	if err != nil {
		return false, err
	}
	return bytes.Equal(ja, jb), nil
}

// Delete removes object id of collection T. It answers ErrReferenced while
// other rows refer to it, naming them.
func Delete[T any, P Record[T]](ctx context.Context, s *Store, id int64) error {
	info := Info[T, P]()
	err := s.tx(ctx, func(tx *gorm.DB) error {
		v, err := get[T, P](ctx, lockRow(tx, s.dialect), id)
		if err != nil {
			return err
		}
		for _, ref := range info.referencedBy {
			var n int64
			if err := tx.Table(ref[0]).Where(ref[1]+" = ?", id).Count(&n).Error; err != nil {
				return fmt.Errorf("count %s: %w", ref[0], err)
			}
			if n > 0 {
				return fmt.Errorf("%w: %d %s refer to it", ErrReferenced, n, ref[0])
			}
		}
		p := P(&v)
		if d, ok := any(p).(deleter); ok {
			if err := d.beforeDelete(ctx, tx); err != nil {
				return err
			}
		}
		if err := tx.Delete(p).Error; err != nil {
			return translate(err)
		}
		return writeAudit(ctx, tx, "delete", info.Name, id, p, nil)
	})
	if err != nil {
		return fmt.Errorf("delete %s %d: %w", info.Name, id, err)
	}
	return nil
}

// lockRow makes the next query take a row lock on PostgreSQL; SQLite's
// immediate transactions already hold the write lock.
func lockRow(tx *gorm.DB, d Dialect) *gorm.DB {
	if d == Postgres {
		return tx.Clauses(forUpdate)
	}
	return tx
}

// IsNotFound reports whether err is (or wraps) ErrNotFound.
func IsNotFound(err error) bool { return errors.Is(err, ErrNotFound) }
