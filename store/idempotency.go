package store

import (
	"bytes"
	"context"
	"fmt"
	"time"
)

// The Idempotency-Key header (IETF httpapi draft "The Idempotency-Key HTTP
// Header Field"): the first answer to a request carrying a key is kept, per
// token, for IdempotencyTTL, and a repeat of the same request with the same
// key gets that answer again instead of being processed twice.

// IdempotencyTTL is how long a key and its answer are kept.
const IdempotencyTTL = 24 * time.Hour

// idempotencyStale is how long a claim may stay in progress before another
// request with the key may take it over (the first one crashed or was cut
// off before it could keep its answer).
const idempotencyStale = 10 * time.Minute

// MaxIdempotencyKeyLen bounds a key's length.
const MaxIdempotencyKeyLen = 255

// IdempotencyOutcome is what ClaimIdempotencyKey found.
type IdempotencyOutcome string

// Outcomes of a claim.
const (
	// IdempotencyNew: the key is new (or expired); process the request and
	// then keep or release the answer.
	IdempotencyNew IdempotencyOutcome = "new"
	// IdempotencyReplay: the same request was answered before; send the
	// kept answer.
	IdempotencyReplay IdempotencyOutcome = "replay"
	// IdempotencyMismatch: the key was used for a different request.
	IdempotencyMismatch IdempotencyOutcome = "mismatch"
	// IdempotencyInFlight: the first request with the key is still being
	// processed.
	IdempotencyInFlight IdempotencyOutcome = "in_flight"
)

// StoredAnswer is a kept answer.
type StoredAnswer struct {
	Status      int
	ContentType string
	Body        []byte
}

// ClaimIdempotencyKey claims key for the token's request whose fingerprint
// is requestHash. With IdempotencyReplay it returns the kept answer.
func (s *Store) ClaimIdempotencyKey(ctx context.Context, tokenID int64, key string, requestHash []byte) (IdempotencyOutcome, StoredAnswer, error) {
	if key == "" || len(key) > MaxIdempotencyKeyLen {
		return "", StoredAnswer{}, Invalid("Idempotency-Key", "must hold 1 to %d characters", MaxIdempotencyKeyLen)
	}
	now := s.now()
	for attempt := 0; attempt < 3; attempt++ {
		res, err := s.sqlDB.ExecContext(ctx, s.rebind(`INSERT INTO idempotency_keys (token_id, key, request_hash, status, content_type, created_at)
			VALUES (?, ?, ?, 0, '', ?) ON CONFLICT (token_id, key) DO NOTHING`), tokenID, key, requestHash, s.timeArg(now))
		if err != nil {
			return "", StoredAnswer{}, fmt.Errorf("claim idempotency key: %w", translate(err))
		}
		if n, _ := res.RowsAffected(); n == 1 {
			if _, err := s.PurgeIdempotencyKeys(ctx); err != nil {
				s.log.WarnContext(ctx, "purge expired idempotency keys", "err", err)
			}
			return IdempotencyNew, StoredAnswer{}, nil
		}
		// Take over an expired key or an abandoned claim.
		res, err = s.sqlDB.ExecContext(ctx, s.rebind(`UPDATE idempotency_keys SET request_hash = ?, status = 0, content_type = '', body = NULL, created_at = ?
			WHERE token_id = ? AND key = ? AND (created_at < ? OR (status = 0 AND created_at < ?))`),
			requestHash, s.timeArg(now), tokenID, key, s.timeArg(now.Add(-IdempotencyTTL)), s.timeArg(now.Add(-idempotencyStale)))
		if err != nil {
			return "", StoredAnswer{}, fmt.Errorf("claim idempotency key: %w", translate(err))
		}
		if n, _ := res.RowsAffected(); n == 1 {
			return IdempotencyNew, StoredAnswer{}, nil
		}
		var (
			hash []byte
			a    StoredAnswer
		)
		err = s.sqlDB.QueryRowContext(ctx, s.rebind(`SELECT request_hash, status, content_type, body FROM idempotency_keys
			WHERE token_id = ? AND key = ?`), tokenID, key).Scan(&hash, &a.Status, &a.ContentType, &a.Body)
		if errNoRows(err) {
			continue // purged between the two statements; claim again
		}
		if err != nil {
			return "", StoredAnswer{}, fmt.Errorf("read idempotency key: %w", translate(err))
		}
		switch {
		case !bytes.Equal(hash, requestHash):
			return IdempotencyMismatch, StoredAnswer{}, nil
		case a.Status == 0:
			return IdempotencyInFlight, StoredAnswer{}, nil
		}
		return IdempotencyReplay, a, nil
	}
	return "", StoredAnswer{}, fmt.Errorf("claim idempotency key: the key keeps vanishing")
}

// SaveIdempotentAnswer keeps the answer of a claimed key.
func (s *Store) SaveIdempotentAnswer(ctx context.Context, tokenID int64, key string, a StoredAnswer) error {
	if a.Status <= 0 {
		return fmt.Errorf("keep idempotent answer: status %d", a.Status)
	}
	if _, err := s.sqlDB.ExecContext(ctx, s.rebind(`UPDATE idempotency_keys SET status = ?, content_type = ?, body = ?
		WHERE token_id = ? AND key = ?`), a.Status, a.ContentType, a.Body, tokenID, key); err != nil {
		return fmt.Errorf("keep idempotent answer: %w", translate(err))
	}
	return nil
}

// ReleaseIdempotencyKey forgets a claimed key whose request failed, so the
// client may retry it with the same key.
func (s *Store) ReleaseIdempotencyKey(ctx context.Context, tokenID int64, key string) error {
	if _, err := s.sqlDB.ExecContext(ctx, s.rebind(`DELETE FROM idempotency_keys WHERE token_id = ? AND key = ? AND status = 0`),
		tokenID, key); err != nil {
		return fmt.Errorf("release idempotency key: %w", translate(err))
	}
	return nil
}

// PurgeIdempotencyKeys deletes keys older than IdempotencyTTL and reports
// how many went. Claims call it; a retention job may too.
func (s *Store) PurgeIdempotencyKeys(ctx context.Context) (int64, error) {
	res, err := s.sqlDB.ExecContext(ctx, s.rebind(`DELETE FROM idempotency_keys WHERE created_at < ?`), s.timeArg(s.now().Add(-IdempotencyTTL)))
	if err != nil {
		return 0, fmt.Errorf("purge idempotency keys: %w", translate(err))
	}
	n, _ := res.RowsAffected()
	return n, nil
}
