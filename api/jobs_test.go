package api_test

import (
	"context"
	"net/http"
	"net/http/httptest"
	"strings"
	"testing"
	"time"

	"kelvard/api"
	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// gateJob is a job that runs until its gate is opened.
type gateJob struct {
	name string
	gate chan struct{}
}

func (g gateJob) Name() string { return g.name }

func (g gateJob) Run(ctx context.Context, _ time.Time, progress func(int, int)) (jobs.Stats, error) {
	progress(0, 1)
	select {
	case <-g.gate:
	case <-ctx.Done():
		return jobs.Stats{}, ctx.Err()
	}
	progress(1, 1)
	return jobs.Stats{Drives: 1, Readings: 24, Note: "one drive"}, nil
}

// newJobsHarness is newHarness with a scheduler holding the jobs (not
// started: the endpoints use manual runs).
func newJobsHarness(t *testing.T, d store.Dialect, js ...jobs.Job) *harness {
	t.Helper()
	st := storetest.Open(t, d)
	sched, err := jobs.New(jobs.Config{Store: st, Jobs: js, Runner: "api-test"})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
		defer cancel()
		if err := sched.Stop(ctx); err != nil {
			t.Errorf("stop jobs: %v", err)
		}
	})
	srv, err := api.New(api.Config{Version: "test", Jobs: sched}, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	h := &harness{t: t, store: st, srv: srv, http: httptest.NewServer(srv)}
	t.Cleanup(h.http.Close)
	h.admin = h.token(store.RoleAdmin, nil)
	return h
}

func TestJobEndpoints(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			job := gateJob{name: "assess", gate: make(chan struct{})}
			h := newJobsHarness(t, d, job)
			viewer, planner := h.token(store.RoleViewer, nil), h.token(store.RolePlanner, nil)
			const run = "/api/v1/jobs/assess/run"

			h.must(http.StatusUnauthorized, http.MethodPost, run, "", nil)
			h.must(http.StatusForbidden, http.MethodPost, run, viewer, nil)
			h.must(http.StatusForbidden, http.MethodPost, run, planner, nil)
			site := h.create("/api/v1/sites", map[string]any{"name": "Works", "ambient_min_c": -2, "ambient_max_c": 41})
			limited := h.token(store.RoleAdmin, []int64{site})
			if p := h.must(http.StatusForbidden, http.MethodPost, run, limited, nil).problem(t); !strings.Contains(p.Detail, "limited to some sites") {
				t.Errorf("site-limited admin: %+v", p)
			}
			if p := h.must(http.StatusNotFound, http.MethodPost, "/api/v1/jobs/defrag/run", h.admin, nil).problem(t); !strings.Contains(p.Detail, "jobs: assess") {
				t.Errorf("unknown job problem %+v", p)
			}

			var started store.JobRun
			h.must(http.StatusAccepted, http.MethodPost, run, h.admin, nil).json(t, &started)
			if started.Status != store.JobRunning || !started.Manual || started.Job != "assess" || !strings.HasPrefix(started.RequestedBy, "token:") || started.ID == 0 {
				t.Errorf("202 answer %+v", started)
			}
			p := h.must(http.StatusConflict, http.MethodPost, run, h.admin, nil).problem(t)
			if !strings.Contains(p.Detail, "still running") {
				t.Errorf("409 problem %+v", p)
			}

			var page store.Page[store.JobRun]
			h.must(http.StatusOK, http.MethodGet, "/api/v1/jobs?job=assess&status=running", viewer, nil).json(t, &page)
			if len(page.Items) != 1 || page.Items[0].ID != started.ID {
				t.Errorf("running runs %+v", page)
			}
			close(job.gate)
			deadline := time.Now().Add(10 * time.Second)
			for {
				page = store.Page[store.JobRun]{}
				h.must(http.StatusOK, http.MethodGet, "/api/v1/jobs?status=succeeded", viewer, nil).json(t, &page)
				if len(page.Items) == 1 {
					break
				}
				if time.Now().After(deadline) {
					t.Fatal("the manual run never succeeded")
				}
				time.Sleep(20 * time.Millisecond)
			}
			done := page.Items[0]
			if done.ID != started.ID || done.FinishedAt == nil || done.Drives != 1 || done.Readings != 24 || done.Note != "one drive" || done.ProgressDone != 1 {
				t.Errorf("finished run %+v", done)
			}

			// A second run once the first has finished, then page through.
			h.must(http.StatusAccepted, http.MethodPost, run, h.admin, nil)
			var first, second store.Page[store.JobRun]
			h.must(http.StatusOK, http.MethodGet, "/api/v1/jobs?limit=1", viewer, nil).json(t, &first)
			if len(first.Items) != 1 || first.Next == "" || first.Items[0].ID == started.ID {
				t.Fatalf("first page %+v", first)
			}
			h.must(http.StatusOK, http.MethodGet, "/api/v1/jobs?limit=1&cursor="+first.Next, viewer, nil).json(t, &second)
			if len(second.Items) != 1 || second.Items[0].ID != started.ID || second.Next != "" {
				t.Errorf("second page %+v", second)
			}

			for _, bad := range []struct{ query, field string }{
				{"status=paused", "status"}, {"limit=0", "limit"}, {"limit=x", "limit"}, {"drive=3", "drive"}, {"cursor=%21%21", "cursor"},
			} {
				a := h.do(http.MethodGet, "/api/v1/jobs?"+bad.query, viewer, nil)
				if a.status != http.StatusBadRequest && a.status != http.StatusUnprocessableEntity {
					t.Errorf("%s: status %d", bad.query, a.status)
					continue
				}
				if !fieldsOf(a.problem(t)).has(bad.field) {
					t.Errorf("%s: problem does not name %s: %s", bad.query, bad.field, a.body)
				}
			}
			h.must(http.StatusUnauthorized, http.MethodGet, "/api/v1/jobs", "", nil)
		})
	}
}

// TestJobsNotConfigured: without a scheduler the job endpoints answer 503.
func TestJobsNotConfigured(t *testing.T) {
	t.Parallel()
	h := newHarness(t, storetest.Dialects[1])
	for _, method := range []string{http.MethodGet, http.MethodPost} {
		path := "/api/v1/jobs"
		if method == http.MethodPost {
			path += "/assess/run"
		}
		if p := h.must(http.StatusServiceUnavailable, method, path, h.admin, nil).problem(t); !strings.Contains(p.Detail, "not configured") {
			t.Errorf("%s %s: %+v", method, path, p)
		}
	}
}

// TestJobsOpenAPI: the job name is documented as a string.
func TestJobsOpenAPI(t *testing.T) {
	t.Parallel()
	h := newHarness(t, storetest.Dialects[1])
	doc, err := h.srv.OpenAPI()
	if err != nil {
		t.Fatal(err)
	}
	op := doc.Paths.Find("/api/v1/jobs/{name}/run").Post
	if op == nil || len(op.Parameters) != 1 || !op.Parameters[0].Value.Schema.Value.Type.Is("string") {
		t.Fatalf("POST /jobs/{name}/run parameters: %+v", op)
	}
	if op.Responses.Status(http.StatusAccepted) == nil {
		t.Error("POST /jobs/{name}/run does not document 202")
	}
}
