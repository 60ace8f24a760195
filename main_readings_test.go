package main

import (
	"bytes"
	"context"
	"net/http"
	"strings"
	"testing"

	"kelvard/store"
	"kelvard/store/storetest"
)

// TestServeIngestLimits starts the server with the ingest limits set by
// environment and by flag, and checks both hold.
func TestServeIngestLimits(t *testing.T) {
	t.Parallel()
	secret, err := store.NewSecret()
	if err != nil {
		t.Fatal(err)
	}
	env := map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, store.SQLite), "KELVARD_BOOTSTRAP_TOKEN": secret,
		"KELVARD_LOG_LEVEL": "warn", "KELVARD_MAX_INGEST_ROWS": "2"}
	srv := startServe(t, env, "--max-ingest-bytes", "300")
	post := func(body string) int {
		req, _ := http.NewRequest(http.MethodPost, srv.base+"/api/v1/readings", strings.NewReader(body))
		req.Header.Set("Authorization", "Bearer "+secret)
		req.Header.Set("Content-Type", "text/csv")
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	// No such position: the rows are read and refused (422), not too many.
	if code := post("position,at\nP-1,2024-01-01T00:00:00Z\nP-1,2024-01-01T01:00:00Z\n"); code != http.StatusUnprocessableEntity {
		t.Errorf("two rows: %d, want 422", code)
	}
	if code := post("position,at\nP-1,2024-01-01T00:00:00Z\nP-1,2024-01-01T01:00:00Z\nP-1,2024-01-01T02:00:00Z\n"); code != http.StatusRequestEntityTooLarge {
		t.Errorf("three rows over KELVARD_MAX_INGEST_ROWS=2: %d, want 413", code)
	}
	if code := post("position,at\n" + strings.Repeat(" ", 300) + "\n"); code != http.StatusRequestEntityTooLarge {
		t.Errorf("body over --max-ingest-bytes 300: %d, want 413", code)
	}
}

func TestBenchAndLimitArguments(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		args []string
		env  map[string]string
		code int
		says string
	}{
		{[]string{"bench"}, nil, 2, "usage: kelvard bench ingest"},
		{[]string{"bench", "assess"}, nil, 2, "usage: kelvard bench ingest"},
		{[]string{"bench", "ingest", "-n", "0"}, nil, 2, "must be positive"},
		{[]string{"bench", "ingest", "--database-url", "sqlite:x.db"}, nil, 1, "needs a PostgreSQL database"},
		{[]string{"serve"}, map[string]string{"KELVARD_MAX_INGEST_ROWS": "many"}, 2, "KELVARD_MAX_INGEST_ROWS"},
		{[]string{"serve"}, map[string]string{"KELVARD_MAX_INGEST_BYTES": "-1"}, 2, "KELVARD_MAX_INGEST_BYTES"},
	} {
		var out, errOut bytes.Buffer
		getenv := func(k string) string { return c.env[k] }
		if code := run(context.Background(), c.args, getenv, &out, &errOut); code != c.code || !strings.Contains(errOut.String(), c.says) {
			t.Errorf("kelvard %v: exit %d, want %d; stderr %q does not say %q", c.args, code, c.code, errOut.String(), c.says)
		}
	}
}
