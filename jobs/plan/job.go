// Package plan runs planning on the scheduler: the nightly pass that
// refreshes the proposed work orders (store/plan holds the planning itself,
// shared by the API, the pages and the command line).
package plan

import (
	"context"
	"fmt"
	"log/slog"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	splan "kelvard/store/plan"
)

// Job is the nightly planning run (jobs.Plan): it refreshes the proposed
// work orders from the findings, the replacement forecast and the
// recurring tasks, withdraws proposals whose cause has cleared, and notes
// cleared causes on approved orders.
type Job struct {
	Store  *store.Store
	Config splan.Config
	Log    *slog.Logger
}

// Name implements jobs.Job.
func (j Job) Name() string { return jobs.Plan }

// Run implements jobs.Job.
func (j Job) Run(ctx context.Context, _ time.Time, progress func(done, total int)) (jobs.Stats, error) {
	if progress == nil {
		progress = func(int, int) {}
	}
	progress(0, 2)
	res, drives, err := splan.Refresh(ctx, j.Store, j.Config)
	if err != nil {
		return jobs.Stats{}, err
	}
	progress(2, 2)
	note := fmt.Sprintf("%d lines proposed (%d new orders), %d refreshed, %d withdrawn (%d orders), %d causes cleared on approved orders, %d duplicates skipped",
		res.Proposed, res.OrdersCreated, res.Refreshed, res.Withdrawn, res.OrdersWithdrawn, res.CauseCleared, res.Duplicates)
	if j.Log != nil {
		j.Log.Info("planning done", slog.Int("proposed", res.Proposed), slog.Int("withdrawn", res.Withdrawn),
			slog.Int("orders_created", res.OrdersCreated))
	}
	return jobs.Stats{Drives: int64(drives), Note: note}, nil
}
