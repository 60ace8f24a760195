package api

import (
	"context"
	"errors"
	"net/http"
	"slices"
	"strconv"
	"strings"

	"github.com/gin-gonic/gin"

	"kelvard/jobs"
	"kelvard/store"
)

// JobRunner is what the API needs of the job scheduler; *jobs.Scheduler
// has it. RunNow's errors match store.ErrJobRunning (a run is going),
// jobs.ErrUnknownJob and jobs.ErrStopped.
type JobRunner interface {
	// Names lists the registered jobs.
	Names() []string
	// RunNow starts a manual run in the background and returns its row.
	RunNow(ctx context.Context, name string) (store.JobRun, error)
	// Runs lists recorded runs newest first.
	Runs(ctx context.Context, q store.JobRunQuery) (store.Page[store.JobRun], error)
}

// jobRoutes registers the job endpoints under v1.
func (s *Server) jobRoutes(v1 string) {
	statuses := make([]string, 0, len(store.JobStatuses()))
	for _, st := range store.JobStatuses() {
		statuses = append(statuses, string(st))
	}
	s.route(operation{Method: http.MethodGet, Path: v1 + "/jobs", Tag: "jobs", Role: store.RoleViewer,
		Summary:  "Recent job runs (scheduled and manual), newest first",
		Response: store.Page[store.JobRun]{}, Query: []param{
			{Name: "job", Doc: "job name, e.g. assess"}, {Name: "status", Enum: statuses},
			{Name: "limit", Kind: "integer"}, {Name: "cursor"}}}, s.listJobRuns)
	s.route(operation{Method: http.MethodPost, Path: v1 + "/jobs/:name/run", Tag: "jobs", Role: store.RoleAdmin,
		Summary:  "Start a run of the job in the background; 409 while one is running on any replica",
		Response: store.JobRun{}, Status: http.StatusAccepted, PathParams: []param{{Name: "name", Doc: "job name"}}}, s.runJob)
}

// jobsOff answers 503 when the server has no scheduler.
func (s *Server) jobsOff(c *gin.Context) bool {
	if s.cfg.Jobs != nil {
		return false
	}
	writeProblem(c, Problem{Status: http.StatusServiceUnavailable, Detail: "jobs are not configured on this server"})
	return true
}

func (s *Server) listJobRuns(c *gin.Context) {
	if s.jobsOff(c) {
		return
	}
	q := store.JobRunQuery{Job: c.Query("job"), Status: store.JobStatus(c.Query("status")), Cursor: c.Query("cursor")}
	for key := range c.Request.URL.Query() {
		switch key {
		case "job", "status", "limit", "cursor":
		default:
			badRequest(c, key, "is not a filter of job runs")
			return
		}
	}
	if q.Status != "" && !slices.Contains(store.JobStatuses(), q.Status) {
		badRequest(c, "status", "must be one of running, succeeded, failed, skipped")
		return
	}
	if v := c.Query("limit"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n < 1 || n > store.MaxLimit {
			badRequest(c, "limit", "must be an integer from 1 to %d", store.MaxLimit)
			return
		}
		q.Limit = n
	}
	page, err := s.cfg.Jobs.Runs(c.Request.Context(), q)
	if err != nil {
		s.fail(c, err)
		return
	}
	c.JSON(http.StatusOK, page)
}

func (s *Server) runJob(c *gin.Context) {
	if s.jobsOff(c) {
		return
	}
	name := c.Param("name")
	names := s.cfg.Jobs.Names()
	if !slices.Contains(names, name) {
		writeProblem(c, Problem{Status: http.StatusNotFound, Detail: "no job named " + strconv.Quote(name) + "; jobs: " + strings.Join(names, ", ")})
		return
	}
	if !tokenOf(c).Principal().AllSites() {
		writeProblem(c, Problem{Status: http.StatusForbidden, Detail: "a job runs over the whole fleet; a token limited to some sites cannot start one"})
		return
	}
	run, err := s.cfg.Jobs.RunNow(c.Request.Context(), name)
	switch {
	case err == nil:
		c.JSON(http.StatusAccepted, run)
	case errors.Is(err, store.ErrJobRunning):
		writeProblem(c, Problem{Status: http.StatusConflict, Detail: lastPart(err)})
	case errors.Is(err, jobs.ErrUnknownJob):
		writeProblem(c, Problem{Status: http.StatusNotFound, Detail: "no job named " + strconv.Quote(name)})
	case errors.Is(err, jobs.ErrStopped):
		c.Header("Retry-After", "5")
		writeProblem(c, Problem{Status: http.StatusServiceUnavailable, Detail: "the server is shutting down; retry on another replica"})
	default:
		s.fail(c, err)
	}
}
