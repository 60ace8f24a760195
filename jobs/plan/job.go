package plan

import (
	"context"
	"fmt"
	"log/slog"
	"time"

	"kelvard/jobs"
	"kelvard/store"
)

// Actor is the name planning writes to the audit log and to proposed_by.
const Actor = "planning"

// Job is the nightly planning run (jobs.Plan): it refreshes the proposed
// work orders from the findings, the replacement forecast and the
// recurring tasks, withdraws proposals whose cause has cleared, and notes
// cleared causes on approved orders.
type Job struct {
	Store  *store.Store
	Config Config
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
	res, drives, err := Refresh(ctx, j.Store, j.Config)
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

// Refresh runs one planning pass over the whole fleet at the store's clock
// and returns what changed and how many drives it looked at. It always
// acts for every site, as Actor: a pass limited to some sites would take
// the others' causes for cleared.
func Refresh(ctx context.Context, st *store.Store, cfg Config) (store.SyncResult, int, error) {
	cfg = cfg.Defaults()
	if err := cfg.Validate(); err != nil {
		return store.SyncResult{}, 0, err
	}
	ctx = store.WithPrincipal(ctx, store.Principal{Actor: Actor})
	d, err := st.LoadPlanningData(ctx)
	if err != nil {
		return store.SyncResult{}, 0, err
	}
	f := BuildForecast(d, cfg, d.At)
	proposals := BuildProposals(d, f, cfg, d.At)
	res, err := st.SyncProposals(ctx, proposals, store.SyncOptions{At: d.At, RedoAfter: cfg.RedoAfter,
		Kinds: []string{store.CauseFinding, store.CauseForecast, store.CauseRecurring}})
	if err != nil {
		return res, len(d.Drives), err
	}
	return res, len(d.Drives), nil
}
