package store_test

import (
	"context"
	"fmt"
	"slices"
	"testing"
	"time"

	"kelvard/store"
)

// TestWorkOrderPageQueries checks the work order list's filters and
// order, the counts by status, and the lines of a drive and of a finding.
func TestWorkOrderPageQueries(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := store.WithPrincipal(context.Background(), store.Principal{Actor: "planner-1"})
		a, b, _ := pagesFleet(t, s)
		now := s.Now()
		day := 24 * time.Hour
		order := func(drive int64, task store.WorkTask, due time.Time) store.WorkOrder {
			t.Helper()
			o, err := s.CreateWorkOrder(ctx, store.NewWorkOrder{DueAt: &due, Lines: []store.NewWorkOrderLine{
				{DriveID: drive, Task: task, Reason: "by hand", LabourH: 1.5}}})
			if err != nil {
				t.Fatal(err)
			}
			return o
		}
		change := func(o store.WorkOrder, ch store.WorkOrderChange) {
			t.Helper()
			if _, err := s.ChangeWorkOrder(ctx, o.ID, ch); err != nil {
				t.Fatal(err)
			}
		}
		o1 := order(a.Drive.ID, store.TaskInspect, now.Add(10*day))
		o2 := order(a.Drive.ID, store.TaskReplaceFan, now.Add(60*day))
		change(o2, store.WorkOrderChange{Status: store.OrderApproved})
		o3 := order(b.Drive.ID, store.TaskInspect, now.Add(-5*day))
		o4 := order(b.Drive.ID, store.TaskCleanFilters, now.Add(40*day))
		change(o4, store.WorkOrderChange{Status: store.OrderCancelled, Reason: "done in the shutdown"})
		o5 := order(a.Drive.ID, store.TaskCleanFilters, now.Add(20*day))
		change(o5, store.WorkOrderChange{Status: store.OrderApproved})
		change(o5, store.WorkOrderChange{Status: store.OrderDone})

		ids := func(f store.WorkOrdersFilter) []int64 {
			t.Helper()
			v, err := s.WorkOrdersList(ctx, f, now, 50, 0)
			if err != nil {
				t.Fatal(err)
			}
			if v.Total != int64(len(v.Rows)) {
				t.Errorf("%+v: total %d, %d rows", f, v.Total, len(v.Rows))
			}
			var out []int64
			for _, r := range v.Rows {
				out = append(out, r.ID)
			}
			return out
		}
		for _, tc := range []struct {
			f    store.WorkOrdersFilter
			want []int64
		}{
			{store.WorkOrdersFilter{}, []int64{o3.ID, o1.ID, o2.ID}},
			{store.WorkOrdersFilter{Status: store.OrdersAll}, []int64{o3.ID, o1.ID, o5.ID, o4.ID, o2.ID}},
			{store.WorkOrdersFilter{Status: "cancelled"}, []int64{o4.ID}},
			{store.WorkOrdersFilter{SiteID: a.Site.ID}, []int64{o1.ID, o2.ID}},
			{store.WorkOrdersFilter{DueWithin: 30 * day}, []int64{o3.ID, o1.ID}},
			{store.WorkOrdersFilter{Overdue: true, Status: store.OrdersAll}, []int64{o3.ID}},
		} {
			if got := ids(tc.f); !slices.Equal(got, tc.want) {
				t.Errorf("%+v: orders %v, want %v", tc.f, got, tc.want)
			}
		}
		v, err := s.WorkOrdersList(ctx, store.WorkOrdersFilter{SiteID: a.Site.ID}, now, 50, 0)
		if err != nil {
			t.Fatal(err)
		}
		r := v.Rows[0]
		if r.SiteLabel != a.Site.Name || r.AreaLabel != a.Area.Name || r.ActiveLines != 1 || r.ActiveLabourH != 1.5 || r.Drives != 1 ||
			r.Status != store.OrderProposed || r.Overdue(now) || !r.DueAt.Equal(o1.DueAt) {
			t.Errorf("row %+v", r)
		}
		if _, err := s.WorkOrdersList(ctx, store.WorkOrdersFilter{Status: "finished"}, now, 50, 0); !isValidation(err) {
			t.Errorf("unknown status: %v", err)
		}
		// A token limited to site b sees b's orders only.
		limited := store.WithPrincipal(ctx, store.Principal{Actor: "viewer", Sites: []int64{b.Site.ID}})
		lv, err := s.WorkOrdersList(limited, store.WorkOrdersFilter{Status: store.OrdersAll}, now, 50, 0)
		if err != nil || lv.Total != 2 {
			t.Errorf("limited list: %v, %+v", err, lv)
		}

		counts, err := s.CountWorkOrders(ctx, now)
		if err != nil {
			t.Fatal(err)
		}
		if counts.ByStatus[store.OrderProposed] != 2 || counts.ByStatus[store.OrderApproved] != 1 || counts.ByStatus[store.OrderDone] != 1 ||
			counts.ByStatus[store.OrderCancelled] != 1 || counts.Open() != 3 || counts.Overdue != 1 {
			t.Errorf("counts %+v", counts)
		}
		if lc, err := s.CountWorkOrders(limited, now); err != nil || lc.Open() != 1 || lc.ByStatus[store.OrderCancelled] != 1 {
			t.Errorf("limited counts %+v, %v", lc, err)
		}

		// Drive a's lines: open orders by due date, then the done one.
		lines, err := s.WorkLines(ctx, store.WorkLinesFilter{DriveID: a.Drive.ID}, 20)
		if err != nil {
			t.Fatal(err)
		}
		var got []string
		for _, l := range lines {
			got = append(got, fmt.Sprintf("%d:%s", l.WorkOrderID, l.OrderStatus))
		}
		want := []string{fmt.Sprintf("%d:proposed", o1.ID), fmt.Sprintf("%d:approved", o2.ID), fmt.Sprintf("%d:done", o5.ID)}
		if !slices.Equal(got, want) {
			t.Errorf("drive lines %v, want %v", got, want)
		}
		if lines[0].TaskTitle != store.TaskInspect.Title() || lines[2].OrderDoneAt == nil || lines[0].OrderTitle == "" {
			t.Errorf("line %+v", lines[0])
		}
		if l, err := s.WorkLines(limited, store.WorkLinesFilter{DriveID: a.Drive.ID}, 20); err != nil || len(l) != 0 {
			t.Errorf("limited token sees site a's lines: %v %v", l, err)
		}

		// A finding's lines: the line it caused, and a line that names it
		// among the findings of the same task.
		fl, err := s.FindingsList(ctx, store.FindingsFilter{DriveID: a.Drive.ID}, 10, 0)
		if err != nil || len(fl.Rows) == 0 {
			t.Fatalf("finding of drive a: %v", err)
		}
		fid := fl.Rows[0].ID
		at := now.Add(14 * day)
		ws, we := store.MonthWindow(at)
		posA, areaA, posB, areaB := a.Position.ID, a.Area.ID, b.Position.ID, b.Area.ID
		_, err = s.SyncProposals(ctx, []store.ProposedLine{
			{SiteID: a.Site.ID, AreaID: &areaA, DriveID: a.Drive.ID, PositionID: &posA, Task: store.TaskUpgradeEnclosure,
				Reason: fmt.Sprintf("Finding %d, enclosure.water (critical): water", fid), CauseKind: store.CauseFinding,
				CauseKey: fmt.Sprintf("finding:%d", fid), FindingID: &fid, DueAt: at, WindowStart: ws, WindowEnd: we},
			{SiteID: b.Site.ID, AreaID: &areaB, DriveID: b.Drive.ID, PositionID: &posB, Task: store.TaskCoolingOrShade,
				Reason:    fmt.Sprintf("Finding 999999, enclosure.dust (minor): dust. Also: finding %d, enclosure.water (critical).", fid),
				CauseKind: store.CauseRecurring, CauseKey: "recurring:test", DueAt: at, WindowStart: ws, WindowEnd: we},
		}, store.SyncOptions{At: now, Kinds: []string{store.CauseFinding, store.CauseRecurring}})
		if err != nil {
			t.Fatal(err)
		}
		byFinding, err := s.WorkLines(ctx, store.WorkLinesFilter{FindingID: fid}, 20)
		if err != nil {
			t.Fatal(err)
		}
		if len(byFinding) != 2 || byFinding[0].OrderStatus != store.OrderProposed {
			t.Errorf("finding %d's lines: %+v", fid, byFinding)
		}
		if _, err := s.WorkLines(ctx, store.WorkLinesFilter{}, 20); !isValidation(err) {
			t.Errorf("no filter: %v", err)
		}

		// Spares for a swap: drives in stores at the order's site of the
		// line's drive model; none for a done order or another site's token.
		spare, err := store.Create(ctx, s, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID, v.ManufacturedAt = "SPARE-A", a.Model.ID, a.Site.ID, now.AddDate(-1, 0, 0)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		spares, err := s.OrderSpares(ctx, o1.ID)
		if err != nil || len(spares[a.Drive.ID]) != 1 || spares[a.Drive.ID][0].ID != spare.ID || spares[a.Drive.ID][0].Serial != "SPARE-A" {
			t.Errorf("spares of order %d: %+v, %v", o1.ID, spares, err)
		}
		if done, err := s.OrderSpares(ctx, o5.ID); err != nil || len(done) != 0 {
			t.Errorf("spares of a done order: %+v, %v", done, err)
		}
		if other, err := s.OrderSpares(limited, o1.ID); err != nil || len(other) != 0 {
			t.Errorf("spares seen by another site's token: %+v, %v", other, err)
		}
	})
}
