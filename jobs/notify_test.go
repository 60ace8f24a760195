package jobs

import (
	"context"
	"crypto/hmac"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// TestWebhookPostsNewCriticalFindings runs an assessment that opens a
// critical finding with notification on, and checks that a local receiver
// gets one signed post, after a failed first attempt is retried.
func TestWebhookPostsNewCriticalFindings(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		const secret = "shared-secret"
		var (
			mu       sync.Mutex
			attempts int
			bodies   [][]byte
		)
		rx := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			mu.Lock()
			defer mu.Unlock()
			attempts++
			if attempts == 1 {
				http.Error(w, "busy", http.StatusServiceUnavailable)
				return
			}
			body, _ := io.ReadAll(r.Body)
			// Check the signature as a receiver would: HMAC-SHA256 of
			// "<t>.<body>" with the shared secret (RFC 2104 HMAC).
			sig := r.Header.Get("Kelvard-Signature")
			parts := strings.Split(sig, ",")
			if len(parts) != 2 || !strings.HasPrefix(parts[0], "t=") || !strings.HasPrefix(parts[1], "v1=") {
				t.Errorf("signature header %q", sig)
			}
			mac := hmac.New(sha256.New, []byte(secret))
			mac.Write([]byte(strings.TrimPrefix(parts[0], "t=") + "."))
			mac.Write(body)
			if want := hex.EncodeToString(mac.Sum(nil)); strings.TrimPrefix(parts[1], "v1=") != want {
				t.Errorf("signature %s does not verify", sig)
			}
			bodies = append(bodies, body)
		}))
		defer rx.Close()

		r := newRig(t, d)
		ctx := context.Background()
		r.ingest(0, 50, func(int) float64 { return 30 }, 40)
		if _, err := store.Update[store.Area](ctx, r.st, r.f.Area.ID, func(a *store.Area) error {
			a.Environment.Water = health.WaterHoseDown
			return nil
		}); err != nil {
			t.Fatal(err)
		}
		n := NewNotifier(r.st, rx.URL, secret, nil)
		n.Backoff = time.Millisecond
		n.now = func() time.Time { return r.now }
		as := NewAssessor(r.st, AssessConfig{Now: func() time.Time { return r.now }, Notify: true})
		if _, err := (AssessJob{Assessor: as, Notifier: n}).Run(ctx, r.now, nil); err != nil {
			t.Fatal(err)
		}
		// The first post failed; the retry is due after the back-off.
		r.now = r.now.Add(time.Second)
		if _, err := n.DeliverDue(ctx); err != nil {
			t.Fatal(err)
		}
		mu.Lock()
		defer mu.Unlock()
		if attempts != 2 || len(bodies) != 1 {
			t.Fatalf("%d attempts, %d delivered; want a failure then one delivery", attempts, len(bodies))
		}
		var p store.NotificationPayload
		if err := json.Unmarshal(bodies[0], &p); err != nil {
			t.Fatal(err)
		}
		if p.Event != "finding.opened" || p.Finding.Rule != "enclosure.water" || p.Finding.Severity != health.SeverityCritical || p.Caution == "" {
			t.Errorf("payload %+v", p)
		}
		// Delivered once: nothing more to post.
		if got, _ := n.DeliverDue(ctx); got != 0 {
			t.Errorf("%d more posts after delivery", got)
		}
	})
}
