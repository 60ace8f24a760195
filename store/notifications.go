package store

import (
	"context"
	"encoding/json"
	"fmt"
	"time"

	"gorm.io/gorm"
	"gorm.io/gorm/clause"

	"kelvard/health"
)

// Notification is a message about a new critical finding waiting to be
// posted to the configured webhook. Rows are written in the transaction
// that opens the finding, so a crash cannot lose one.
type Notification struct {
	ID            int64           `json:"id" gorm:"primaryKey"`
	FindingID     int64           `json:"finding_id"`
	Payload       json.RawMessage `json:"payload"`
	Attempts      int             `json:"attempts"`
	NextAttemptAt time.Time       `json:"next_attempt_at"`
	DeliveredAt   *time.Time      `json:"delivered_at"`
	LastError     string          `json:"last_error"`
	CreatedAt     time.Time       `json:"created_at"`
}

// NotificationPayload is the JSON body posted for a new critical finding.
type NotificationPayload struct {
	Event   string  `json:"event"`
	Finding Finding `json:"finding"`
	Caution string  `json:"caution"`
}

func queueNotification(tx *gorm.DB, f Finding, at time.Time) error {
	body, err := SafeJSON(NotificationPayload{Event: "finding.opened", Finding: f, Caution: health.SafetyCaution})
	if err != nil {
		return fmt.Errorf("encode notification of finding %d: %w", f.ID, err)
	}
	n := Notification{FindingID: f.ID, Payload: body, NextAttemptAt: at}
	if err := tx.Create(&n).Error; err != nil {
		return fmt.Errorf("queue notification of finding %d: %w", f.ID, translate(err))
	}
	return nil
}

// ClaimNotifications takes up to limit undelivered notifications that are
// due and have attempts left, and pushes their next attempt lease ahead, so
// another replica's sender skips them while this one posts. A sender that
// dies mid-post leaves them to be retried when the lease ends.
func (s *Store) ClaimNotifications(ctx context.Context, now time.Time, lease time.Duration, maxAttempts, limit int) ([]Notification, error) {
	var out []Notification
	err := s.tx(ctx, func(tx *gorm.DB) error {
		q := tx.Where("delivered_at IS NULL AND next_attempt_at <= ? AND attempts < ?", now.UTC(), maxAttempts).Order("id").Limit(limit)
		if s.dialect == Postgres {
			q = q.Clauses(clause.Locking{Strength: "UPDATE", Options: "SKIP LOCKED"})
		}
		if err := q.Find(&out).Error; err != nil {
			return translate(err)
		}
		if len(out) == 0 {
			return nil
		}
		ids := make([]int64, len(out))
		for i, n := range out {
			ids[i] = n.ID
		}
		return translate(tx.Model(&Notification{}).Where("id IN ?", ids).Update("next_attempt_at", now.Add(lease).UTC()).Error)
	})
	if err != nil {
		return nil, fmt.Errorf("claim notifications: %w", err)
	}
	return out, nil
}

// NotificationDelivered records a successful post.
func (s *Store) NotificationDelivered(ctx context.Context, id int64, at time.Time) error {
	err := s.db.WithContext(ctx).Model(&Notification{}).Where("id = ?", id).
		Updates(map[string]any{"delivered_at": at.UTC(), "attempts": gorm.Expr("attempts + 1"), "last_error": ""}).Error
	if err != nil {
		return fmt.Errorf("mark notification %d delivered: %w", id, translate(err))
	}
	return nil
}

// NotificationFailed records a failed post and when to try again.
func (s *Store) NotificationFailed(ctx context.Context, id int64, next time.Time, reason string) error {
	if len(reason) > 500 {
		reason = reason[:500]
	}
	err := s.db.WithContext(ctx).Model(&Notification{}).Where("id = ?", id).
		Updates(map[string]any{"next_attempt_at": next.UTC(), "attempts": gorm.Expr("attempts + 1"), "last_error": reason}).Error
	if err != nil {
		return fmt.Errorf("mark notification %d failed: %w", id, translate(err))
	}
	return nil
}
