package faults

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"strconv"
	"strings"
	"testing"
	"time"

	"kelvard/store"
)

// client sends requests to one server with a bearer token.
type client struct {
	base  string
	token string
	hc    *http.Client
}

func newClient(base, token string) *client {
	return &client{base: base, token: token, hc: &http.Client{Timeout: 2 * time.Minute}}
}

// answer is one HTTP answer.
type answer struct {
	status int
	header http.Header
	body   []byte
}

// short is the answer's body cut for a message.
func (a answer) short() string { return tail(string(a.body), 1000) }

// do sends a request; err is a transport error (no answer received).
func (c *client) do(ctx context.Context, method, path, contentType string, body []byte) (answer, error) {
	var r io.Reader
	if body != nil {
		r = bytes.NewReader(body)
	}
	req, err := http.NewRequestWithContext(ctx, method, c.base+path, r)
	if err != nil {
		return answer{}, err
	}
	if c.token != "" {
		req.Header.Set("Authorization", "Bearer "+c.token)
	}
	if contentType != "" {
		req.Header.Set("Content-Type", contentType)
	}
	resp, err := c.hc.Do(req)
	if err != nil {
		return answer{}, err
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		return answer{}, fmt.Errorf("read answer: %w", err)
	}
	return answer{status: resp.StatusCode, header: resp.Header, body: b}, nil
}

// mustDo sends a request and fails the test unless it gets want.
func (c *client) mustDo(t *testing.T, method, path string, body []byte, want int) []byte {
	t.Helper()
	ct := ""
	if body != nil {
		ct = "application/json"
	}
	a, err := c.do(context.Background(), method, path, ct, body)
	if err != nil {
		t.Fatalf("%s %s: %v", method, path, err)
	}
	if a.status != want {
		t.Fatalf("%s %s: %d %s, want %d", method, path, a.status, a.short(), want)
	}
	return a.body
}

// postReadings posts a batch as JSON.
func (c *client) postReadings(ctx context.Context, rows []store.Reading) (answer, store.IngestResult, error) {
	body, err := json.Marshal(rows)
	if err != nil {
		return answer{}, store.IngestResult{}, err
	}
	a, err := c.do(ctx, http.MethodPost, "/api/v1/readings", "application/json", body)
	if err != nil {
		return a, store.IngestResult{}, err
	}
	var res store.IngestResult
	if a.status == http.StatusOK {
		if err := json.Unmarshal(a.body, &res); err != nil {
			return a, res, fmt.Errorf("decode ingest answer %s: %w", a.short(), err)
		}
	}
	return a, res, nil
}

// decode unmarshals a JSON answer or fails the test.
func decode(t *testing.T, body []byte, v any) {
	t.Helper()
	if err := json.Unmarshal(body, v); err != nil {
		t.Fatalf("decode %T: %v: %s", v, err, tail(string(body), 500))
	}
}

// problem is the RFC 9457 body the API answers errors with.
type problem struct {
	Type     string `json:"type"`
	Title    string `json:"title"`
	Status   int    `json:"status"`
	Detail   string `json:"detail"`
	Instance string `json:"instance"`
}

// checkUnavailable checks that a answers 503 as a well-formed problem with
// Retry-After, naming the database; it returns what is wrong, or "".
func checkUnavailable(a answer, path string) string {
	if a.status != http.StatusServiceUnavailable {
		return fmt.Sprintf("status %d, want 503: %s", a.status, a.short())
	}
	if ra, err := strconv.Atoi(a.header.Get("Retry-After")); err != nil || ra < 1 {
		return fmt.Sprintf("Retry-After %q, want a positive number of seconds", a.header.Get("Retry-After"))
	}
	if ct := a.header.Get("Content-Type"); !strings.HasPrefix(ct, "application/problem+json") {
		return fmt.Sprintf("Content-Type %q, want application/problem+json", ct)
	}
	var p problem
	if err := json.Unmarshal(a.body, &p); err != nil {
		return fmt.Sprintf("body is not a problem: %v: %s", err, a.short())
	}
	if p.Status != http.StatusServiceUnavailable || p.Type == "" || p.Title == "" || p.Instance != path ||
		!strings.Contains(p.Detail, "database") {
		return fmt.Sprintf("problem %+v: want status 503, a type, a title, instance %s and a detail naming the database", p, path)
	}
	return ""
}

// jobRun reads one job run from the API's list.
func (c *client) jobRun(t *testing.T, id int64) (store.JobRun, bool) {
	t.Helper()
	a, err := c.do(context.Background(), http.MethodGet, "/api/v1/jobs?limit=1000", "", nil)
	if err != nil || a.status != http.StatusOK {
		return store.JobRun{}, false
	}
	var page store.Page[store.JobRun]
	if err := json.Unmarshal(a.body, &page); err != nil {
		t.Fatalf("decode job runs: %v: %s", err, a.short())
	}
	for _, r := range page.Items {
		if r.ID == id {
			return r, true
		}
	}
	return store.JobRun{}, false
}

// startRun starts a manual run of the job and returns its row.
func (c *client) startRun(t *testing.T, job string) store.JobRun {
	t.Helper()
	body := c.mustDo(t, http.MethodPost, "/api/v1/jobs/"+job+"/run", nil, http.StatusAccepted)
	var run store.JobRun
	if err := json.Unmarshal(body, &run); err != nil {
		t.Fatalf("decode run: %v: %s", err, body)
	}
	return run
}

// waitRun polls the run until it is no longer running.
func (c *client) waitRun(t *testing.T, id int64, timeout time.Duration) store.JobRun {
	t.Helper()
	var run store.JobRun
	if !poll(timeout, 100*time.Millisecond, func() bool {
		r, ok := c.jobRun(t, id)
		run = r
		return ok && r.Status != store.JobRunning
	}) {
		t.Fatalf("run %d still %q after %v", id, run.Status, timeout)
	}
	return run
}
