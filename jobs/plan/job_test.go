package plan

import (
	"context"
	"strings"
	"testing"
	"time"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

// TestJobRunsAPlanningPass: the scheduled job is named plan and reports
// the pass it ran on a fleet with a critical enclosure finding.
func TestJobRunsAPlanningPass(t *testing.T) {
	t.Parallel()
	now := time.Date(2026, 3, 2, 8, 0, 0, 0, time.UTC)
	st := storetest.OpenWith(t, store.SQLite, store.Options{Now: func() time.Time { return now }})
	f := storetest.Build(t, st, "a")
	ctx := context.Background()
	if _, err := store.Update[store.Area](ctx, st, f.Area.ID, func(a *store.Area) error { a.Environment.Water = "hose_down"; return nil }); err != nil {
		t.Fatal(err)
	}
	if _, err := jobs.NewAssessor(st, jobs.AssessConfig{Now: func() time.Time { return now }}).Assess(ctx, jobs.AssessOptions{}); err != nil {
		t.Fatal(err)
	}
	j := Job{Store: st}
	if j.Name() != jobs.Plan {
		t.Errorf("job name %q", j.Name())
	}
	stats, err := j.Run(ctx, now, nil)
	if err != nil {
		t.Fatal(err)
	}
	if stats.Drives != 1 || !strings.Contains(stats.Note, "lines proposed") || strings.HasPrefix(stats.Note, "0 lines") {
		t.Errorf("stats %+v", stats)
	}
}
