package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"gorm.io/gorm"
)

// AuditEntry is one write to the register: who, what, when, and the object
// before and after.
type AuditEntry struct {
	ID         int64           `json:"id" gorm:"primaryKey"`
	At         time.Time       `json:"at"`
	Actor      string          `json:"actor"`
	Action     string          `json:"action"`
	Resource   string          `json:"resource"`
	ResourceID int64           `json:"resource_id"`
	Before     json.RawMessage `json:"before" gorm:"type:jsonb"`
	After      json.RawMessage `json:"after" gorm:"type:jsonb"`
}

// TableName names the audit table.
func (AuditEntry) TableName() string { return "audit" }

// writeAudit records one write inside the caller's transaction, so the
// audit row and the change commit or roll back together.
func writeAudit(ctx context.Context, tx *gorm.DB, action, resource string, id int64, before, after any) error {
	e := AuditEntry{At: tx.NowFunc(), Actor: PrincipalFrom(ctx).Actor, Action: action, Resource: resource, ResourceID: id}
	var err error
	if before != nil {
		if e.Before, err = json.Marshal(before); err != nil {
			return fmt.Errorf("audit %s %d: %w", resource, id, err)
		}
	}
	if after != nil {
		if e.After, err = json.Marshal(after); err != nil {
			return fmt.Errorf("audit %s %d: %w", resource, id, err)
		}
	}
	if err := tx.Create(&e).Error; err != nil {
		return fmt.Errorf("audit %s %d: %w", resource, id, translate(err))
	}
	return nil
}

// AuditQuery selects audit entries.
type AuditQuery struct {
	Resource   string
	ResourceID int64
	Actor      string
	From, To   time.Time
	Limit      int
	Cursor     string
}

// Audit lists audit entries newest first.
func (s *Store) Audit(ctx context.Context, q AuditQuery) (Page[AuditEntry], error) {
	before, err := DecodeCursor(q.Cursor)
	if err != nil {
		return Page[AuditEntry]{}, err
	}
	limit := q.Limit
	if limit <= 0 {
		limit = DefaultLimit
	}
	if limit > MaxLimit {
		return Page[AuditEntry]{}, Invalid("limit", "must be at most %d", MaxLimit)
	}
	var fe fieldErrors
	for _, f := range [][2]string{{"resource", q.Resource}, {"actor", q.Actor}} {
		if !GoodText(f[1]) {
			fe.add(f[0], "%s", BadTextReason)
		}
	}
	if err := fe.err(); err != nil {
		return Page[AuditEntry]{}, err
	}
	db := s.db.WithContext(ctx).Model(&AuditEntry{})
	if q.Resource != "" {
		db = db.Where("resource = ?", q.Resource)
	}
	if q.ResourceID > 0 {
		db = db.Where("resource_id = ?", q.ResourceID)
	}
	if q.Actor != "" {
		db = db.Where("actor = ?", q.Actor)
	}
	if !q.From.IsZero() {
		db = db.Where("at >= ?", utc(q.From))
	}
	if !q.To.IsZero() {
		db = db.Where("at < ?", utc(q.To))
	}
	if before > 0 {
		db = db.Where("id < ?", before)
	}
	var items []AuditEntry
	if err := db.Order("id DESC").Limit(limit + 1).Find(&items).Error; err != nil {
		return Page[AuditEntry]{}, fmt.Errorf("list audit: %w", translate(err))
	}
	page := Page[AuditEntry]{Items: items}
	if len(items) > limit {
		page.Items = items[:limit]
		page.Next = EncodeCursor(page.Items[limit-1].ID)
	}
	return page, nil
}
