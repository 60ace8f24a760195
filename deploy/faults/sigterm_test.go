package faults

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptrace"
	"syscall"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// Shape of the SIGTERM test: an assessment that takes a second or more and
// a readings POST whose body the test holds back until shutdown has begun.
const (
	termDrives   = 100
	termPerDrive = 1000
	termPostRows = 20000
	termStep     = time.Hour
)

// TestSigtermFinishesInFlightWork sends SIGTERM while an assessment runs
// and a large readings POST is being received. Shutdown closes the
// listener at once, but the POST is answered 200 with every reading
// stored, the assessment finishes and its row is recorded as succeeded
// after the signal, and the process exits 0.
func TestSigtermFinishesInFlightWork(t *testing.T) {
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			testSigterm(t, d)
		})
	}
}

func testSigterm(t *testing.T, d store.Dialect) {
	ctx := context.Background()
	url := storetest.URL(t, d)
	st := openStore(t, url)
	f := buildFleet(t, st, termDrives)
	var rows []store.Reading
	for p, tag := range f.tags {
		rows = append(rows, batch(tag, p, 0, termPerDrive, termStep)...)
	}
	if _, err := st.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
		t.Fatal(err)
	}
	secret, err := store.NewSecret()
	if err != nil {
		t.Fatal(err)
	}
	srv := startServer(t, map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_BOOTSTRAP_TOKEN": secret, "KELVARD_LOG_LEVEL": "info"},
		"--assess-schedule", "off", "--retention-schedule", "off")
	srv.waitReadyz(t, http.StatusOK, startTimeout)
	c := newClient(srv.base, secret)

	// The large POST: the client announces the body with Expect:
	// 100-continue, and the server asks for it only once the handler
	// reads it, so "100 Continue" says the request is in the handler.
	// A minute apart, after the hourly readings already stored.
	body, err := json.Marshal(batch(f.tags[0], 0, termPerDrive*int(termStep/time.Minute), termPostRows, time.Minute))
	if err != nil {
		t.Fatal(err)
	}
	pr, pw := io.Pipe()
	got100 := make(chan struct{})
	trace := &httptrace.ClientTrace{Got100Continue: func() { close(got100) }}
	req, err := http.NewRequestWithContext(httptrace.WithClientTrace(ctx, trace), http.MethodPost, srv.base+"/api/v1/readings", pr)
	if err != nil {
		t.Fatal(err)
	}
	req.ContentLength = int64(len(body))
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("Authorization", "Bearer "+secret)
	req.Header.Set("Expect", "100-continue")
	hc := &http.Client{Transport: &http.Transport{ExpectContinueTimeout: time.Minute}, Timeout: 2 * time.Minute}
	type result struct {
		a   answer
		err error
	}
	posted := make(chan result, 1)

	run := c.startRun(t, jobs.Assess)
	go func() {
		resp, err := hc.Do(req)
		if err != nil {
			posted <- result{err: err}
			return
		}
		defer resp.Body.Close()
		b, err := io.ReadAll(resp.Body)
		posted <- result{a: answer{status: resp.StatusCode, header: resp.Header, body: b}, err: err}
	}()
	select {
	case <-got100:
	case r := <-posted:
		t.Fatalf("the POST ended before the server asked for its body: %d %s %v", r.a.status, r.a.short(), r.err)
	case <-time.After(startTimeout):
		t.Fatal("the server never asked for the POST's body")
	}

	termAt := time.Now()
	if err := srv.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	// Shutdown has begun once the listener refuses new connections.
	if !poll(30*time.Second, 10*time.Millisecond, func() bool {
		_, err := (&http.Client{Timeout: 2 * time.Second}).Get(srv.base + "/healthz")
		return err != nil
	}) {
		t.Fatal("the listener still takes connections 30 s after SIGTERM")
	}
	// Now send the body.
	go func() {
		_, err := io.Copy(pw, bytes.NewReader(body))
		pw.CloseWithError(err)
	}()
	var r result
	select {
	case r = <-posted:
	case <-time.After(2 * time.Minute):
		t.Fatal("no answer to the POST")
	}
	if r.err != nil || r.a.status != http.StatusOK {
		t.Fatalf("POST in flight at SIGTERM: %v %d %s", r.err, r.a.status, r.a.short())
	}
	var res store.IngestResult
	decode(t, r.a.body, &res)
	if res.Inserted != termPostRows {
		t.Errorf("POST in flight at SIGTERM stored %d of %d readings: %+v", res.Inserted, termPostRows, res)
	}
	if code := srv.wait(t); code != 0 {
		t.Errorf("exit status %d after SIGTERM, want 0", code)
	}
	took := time.Since(termAt)

	done, err := st.JobRun(ctx, run.ID)
	if err != nil {
		t.Fatal(err)
	}
	if done.Status != store.JobSucceeded || done.FinishedAt == nil || done.Drives != termDrives {
		t.Fatalf("assessment row after shutdown: %+v", done)
	}
	if !done.FinishedAt.After(termAt) {
		t.Fatalf("the assessment finished at %v, before SIGTERM at %v: it was not in flight (make the fleet larger)",
			done.FinishedAt.Format(time.RFC3339Nano), termAt.UTC().Format(time.RFC3339Nano))
	}
	var n int64
	if err := st.SQL().QueryRowContext(ctx, "SELECT count(*) FROM readings").Scan(&n); err != nil {
		t.Fatal(err)
	}
	if want := int64(termDrives*termPerDrive + termPostRows); n != want {
		t.Errorf("%d readings stored, want %d", n, want)
	}
	t.Logf("exited %v after SIGTERM; the assessment finished %v after it", took.Round(time.Millisecond),
		done.FinishedAt.Sub(termAt).Round(time.Millisecond))
}
