package jobs

import (
	"bytes"
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"strconv"
	"time"

	"kelvard/store"
)

// Notifier posts queued notifications (new critical findings) to a
// webhook. Each post is signed: the header Kelvard-Signature carries
// "t=<unix seconds>,v1=<hex HMAC-SHA256 of "<t>.<body>" with the secret>",
// so a receiver can check origin and freshness. Failed posts are retried
// with exponential back-off.
type Notifier struct {
	store  *store.Store
	url    string
	secret []byte
	client *http.Client
	log    *slog.Logger
	now    func() time.Time
	// MaxAttempts bounds retries (default 10); Backoff is the first delay,
	// doubled on each failure up to an hour (default 30 s).
	MaxAttempts int
	Backoff     time.Duration
}

// NewNotifier returns a notifier for url, or nil when url is empty.
func NewNotifier(st *store.Store, url, secret string, log *slog.Logger) *Notifier {
	if url == "" {
		return nil
	}
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	return &Notifier{store: st, url: url, secret: []byte(secret), client: &http.Client{Timeout: 10 * time.Second},
		log: log, now: time.Now, MaxAttempts: 10, Backoff: 30 * time.Second}
}

// Sign returns the Kelvard-Signature header value for body at time t.
func Sign(secret []byte, t time.Time, body []byte) string {
	ts := strconv.FormatInt(t.Unix(), 10)
	mac := hmac.New(sha256.New, secret)
	mac.Write([]byte(ts + "."))
	mac.Write(body)
	return "t=" + ts + ",v1=" + hex.EncodeToString(mac.Sum(nil))
}

// DeliverDue posts every due notification once and returns how many were
// delivered.
func (n *Notifier) DeliverDue(ctx context.Context) (int, error) {
	delivered := 0
	for {
		batch, err := n.store.ClaimNotifications(ctx, n.now(), 2*time.Minute, n.MaxAttempts, 50)
		if err != nil {
			return delivered, err
		}
		if len(batch) == 0 {
			return delivered, nil
		}
		for _, msg := range batch {
			if err := n.post(ctx, msg); err != nil {
				delay := n.Backoff << min(msg.Attempts, 7)
				delay = min(delay, time.Hour)
				n.log.Warn("webhook post failed", slog.Int64("notification", msg.ID), slog.Int("attempt", msg.Attempts+1), slog.Any("err", err))
				if err := n.store.NotificationFailed(ctx, msg.ID, n.now().Add(delay), err.Error()); err != nil {
					return delivered, err
				}
				continue
			}
			if err := n.store.NotificationDelivered(ctx, msg.ID, n.now()); err != nil {
				return delivered, err
			}
			delivered++
		}
	}
}

func (n *Notifier) post(ctx context.Context, msg store.Notification) error {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, n.url, bytes.NewReader(msg.Payload))
	if err != nil {
		return err
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("Kelvard-Signature", Sign(n.secret, n.now(), msg.Payload))
	req.Header.Set("Kelvard-Delivery", strconv.FormatInt(msg.ID, 10))
	resp, err := n.client.Do(req)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	io.Copy(io.Discard, io.LimitReader(resp.Body, 64<<10))
	if resp.StatusCode/100 != 2 {
		return fmt.Errorf("webhook answered %s", resp.Status)
	}
	return nil
}

// Run posts due notifications every interval until ctx ends.
func (n *Notifier) Run(ctx context.Context, interval time.Duration) {
	t := time.NewTicker(interval)
	defer t.Stop()
	for {
		if _, err := n.DeliverDue(ctx); err != nil && ctx.Err() == nil {
			n.log.Warn("webhook delivery", slog.Any("err", err))
		}
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
	}
}
