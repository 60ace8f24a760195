package plan

import (
	"context"

	"kelvard/store"
)

// Actor is the name planning writes to the audit log and to proposed_by.
const Actor = "planning"

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
	return res, len(d.Drives), err
}
