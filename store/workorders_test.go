package store_test

import (
	"context"
	"errors"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/storetest"
)

// errFields lists the fields a validation error names.
func errFields(t *testing.T, err error) []string {
	t.Helper()
	var ve *store.ValidationError
	if !errors.As(err, &ve) {
		t.Fatalf("want a validation error, got %v", err)
	}
	var out []string
	for _, f := range ve.Fields {
		out = append(out, f.Field)
	}
	return out
}

func TestCreateWorkOrderChecksItsLines(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		a := storetest.Build(t, s, "a")
		b := storetest.Build(t, s, "b")
		for _, c := range []struct {
			n    store.NewWorkOrder
			want []string
		}{
			{store.NewWorkOrder{}, []string{"lines"}},
			{store.NewWorkOrder{Lines: []store.NewWorkOrderLine{{DriveID: a.Drive.ID, Task: "repaint", Reason: "x"}}}, []string{"lines[0].task"}},
			{store.NewWorkOrder{Lines: []store.NewWorkOrderLine{{DriveID: a.Drive.ID, Task: store.TaskInspect}}}, []string{"lines[0].reason"}},
			{store.NewWorkOrder{Lines: []store.NewWorkOrderLine{{DriveID: 999, Task: store.TaskInspect, Reason: "x"}}}, []string{"lines[0].drive_id"}},
			{store.NewWorkOrder{Lines: []store.NewWorkOrderLine{{DriveID: a.Drive.ID, Task: store.TaskInspect, Reason: "x", LabourH: -1}}}, []string{"lines[0].labour_h"}},
			{store.NewWorkOrder{Lines: []store.NewWorkOrderLine{{DriveID: a.Drive.ID, Task: store.TaskInspect, Reason: "x"},
				{DriveID: b.Drive.ID, Task: store.TaskInspect, Reason: "x"}}}, []string{"lines[1].drive_id"}},
		} {
			_, err := s.CreateWorkOrder(ctx, c.n)
			if got := errFields(t, err); !slices.Equal(got, c.want) {
				t.Errorf("%+v: fields %v, want %v", c.n, got, c.want)
			}
		}
		due := time.Date(2026, 2, 10, 0, 0, 0, 0, time.UTC)
		o, err := s.CreateWorkOrder(ctx, store.NewWorkOrder{DueAt: &due, ExternalRef: " PM-9 ", Lines: []store.NewWorkOrderLine{
			{DriveID: a.Drive.ID, Task: store.TaskInspect, Reason: "noisy fan", LabourH: 1}}})
		if err != nil {
			t.Fatal(err)
		}
		if o.SiteID != a.Site.ID || o.AreaID == nil || *o.AreaID != a.Area.ID || o.ExternalRef != "PM-9" || o.Status != store.OrderProposed ||
			!o.WindowStart.Equal(time.Date(2026, 2, 1, 0, 0, 0, 0, time.UTC)) || !o.DueAt.Equal(due) || o.Priority != 7 ||
			o.Caution != health.SafetyCaution || o.Lines[0].PositionTag != a.Position.Tag || o.Lines[0].CauseKind != store.CauseManual {
			t.Errorf("order %+v", o)
		}
		// A drive with a work order line cannot be deleted.
		spare, err := store.Create[store.Drive](ctx, s, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID, v.ManufacturedAt = "SP-9", a.Model.ID, a.Site.ID, time.Date(2022, 1, 1, 0, 0, 0, 0, time.UTC)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := s.CreateWorkOrder(ctx, store.NewWorkOrder{Lines: []store.NewWorkOrderLine{{DriveID: spare.ID, Task: store.TaskEnergise, Reason: "yearly"}}}); err != nil {
			t.Fatal(err)
		}
		if err := store.Delete[store.Drive](ctx, s, spare.ID); !errors.Is(err, store.ErrReferenced) || !strings.Contains(err.Error(), "work_order_lines") {
			t.Errorf("delete a drive with a work order line: %v", err)
		}
		// The external reference is unique.
		_, err = s.CreateWorkOrder(ctx, store.NewWorkOrder{ExternalRef: "PM-9", Lines: []store.NewWorkOrderLine{
			{DriveID: a.Drive.ID, Task: store.TaskInspect, Reason: "again"}}})
		if !errors.Is(err, store.ErrDuplicate) {
			t.Errorf("duplicate reference: %v", err)
		}
		// A token limited to another site sees nothing of it.
		other := store.WithPrincipal(ctx, store.Principal{Actor: "b", Sites: []int64{b.Site.ID}})
		if _, err := s.GetWorkOrder(other, o.ID); !store.IsNotFound(err) {
			t.Errorf("other site reads the order: %v", err)
		}
		page, err := s.ListWorkOrders(other, store.ListQuery{})
		if err != nil || len(page.Items) != 0 {
			t.Errorf("other site lists %d orders (%v)", len(page.Items), err)
		}
		if _, err := s.ChangeWorkOrder(other, o.ID, store.WorkOrderChange{Status: store.OrderApproved}); !store.IsNotFound(err) {
			t.Errorf("other site approves: %v", err)
		}
	})
}

// TestWorkOrderLifecycle walks the allowed steps and refuses the others.
func TestWorkOrderLifecycle(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := store.WithPrincipal(context.Background(), store.Principal{Actor: "planner-1"})
		f := storetest.Build(t, s, "a")
		newOrder := func() store.WorkOrder {
			o, err := s.CreateWorkOrder(ctx, store.NewWorkOrder{Lines: []store.NewWorkOrderLine{
				{DriveID: f.Drive.ID, Task: store.TaskInspect, Reason: "check", LabourH: 1}}})
			if err != nil {
				t.Fatal(err)
			}
			return o
		}
		when := time.Date(2026, 3, 1, 6, 0, 0, 0, time.UTC)
		refuse := func(o store.WorkOrder, ch store.WorkOrderChange, field string) {
			t.Helper()
			_, err := s.ChangeWorkOrder(ctx, o.ID, ch)
			if got := errFields(t, err); !slices.Contains(got, field) {
				t.Errorf("%s + %+v: fields %v, want %s", o.Status, ch, got, field)
			}
			if back, _ := s.GetWorkOrder(ctx, o.ID); back.Status != o.Status {
				t.Errorf("a refused change moved the order to %s", back.Status)
			}
		}
		o := newOrder()
		refuse(o, store.WorkOrderChange{Status: store.OrderScheduled, ScheduledFor: &when}, "status")
		refuse(o, store.WorkOrderChange{Status: store.OrderDone}, "status")
		refuse(o, store.WorkOrderChange{Status: store.OrderWithdrawn}, "status")
		refuse(o, store.WorkOrderChange{Status: "finished"}, "status")
		refuse(o, store.WorkOrderChange{Status: store.OrderCancelled}, "reason")
		refuse(o, store.WorkOrderChange{Status: store.OrderApproved, Lines: []store.LineCompletion{{LineID: 1}}}, "lines")
		o, err := s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderApproved})
		if err != nil || o.ApprovedBy != "planner-1" || o.ApprovedAt == nil {
			t.Fatalf("approve: %v %+v", err, o)
		}
		refuse(o, store.WorkOrderChange{Status: store.OrderScheduled}, "scheduled_for")
		refuse(o, store.WorkOrderChange{Status: store.OrderApproved, ScheduledFor: &when}, "scheduled_for")
		o, err = s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderScheduled, ScheduledFor: &when})
		if err != nil || o.ScheduledBy != "planner-1" || !o.ScheduledFor.Equal(when) {
			t.Fatalf("schedule: %v %+v", err, o)
		}
		later := when.AddDate(0, 0, 7)
		if o, err = s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{ScheduledFor: &later}); err != nil || !o.ScheduledFor.Equal(later) {
			t.Errorf("reschedule: %v %+v", err, o)
		}
		future := s.Now().Add(time.Hour)
		refuse(o, store.WorkOrderChange{Status: store.OrderDone, DoneAt: &future}, "done_at")
		refuse(o, store.WorkOrderChange{Status: store.OrderDone, Lines: []store.LineCompletion{{LineID: 999}}}, "lines[0].line_id")
		refuse(o, store.WorkOrderChange{Status: store.OrderDone, Lines: []store.LineCompletion{{LineID: o.Lines[0].ID, Action: "painted"}}}, "lines[0].action")
		o, err = s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderDone})
		if err != nil || o.DoneBy != "planner-1" || o.Lines[0].Action != store.ActionWorkDone || o.Lines[0].Outcome != "done" {
			t.Fatalf("done: %v %+v", err, o)
		}
		refuse(o, store.WorkOrderChange{Status: store.OrderCancelled, Reason: "late"}, "status")

		c := newOrder()
		c, err = s.ChangeWorkOrder(ctx, c.ID, store.WorkOrderChange{Status: store.OrderCancelled, Reason: "covered by the shutdown"})
		if err != nil || c.CancelledBy != "planner-1" || c.StatusReason != "covered by the shutdown" {
			t.Errorf("cancel: %v %+v", err, c)
		}
		audit, err := s.Audit(ctx, store.AuditQuery{Resource: "work-orders", ResourceID: o.ID})
		if err != nil {
			t.Fatal(err)
		}
		var actions []string
		for _, e := range audit.Items {
			actions = append(actions, e.Action+":"+e.Actor)
		}
		want := []string{"done:planner-1", "update:planner-1", "scheduled:planner-1", "approved:planner-1", "create:planner-1"}
		if !slices.Equal(actions, want) {
			t.Errorf("audit %v, want %v", actions, want)
		}
	})
}

// TestCompletionChangesEnclosureAndEnergises checks the completion actions
// that change a position and a stored drive, and that a bad enclosure
// refuses the whole completion.
func TestCompletionChangesEnclosureAndEnergises(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, s *store.Store) {
		ctx := context.Background()
		f := storetest.Build(t, s, "a")
		spare, err := store.Create[store.Drive](ctx, s, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID, v.StoresAreaID, v.ManufacturedAt = "SP-1", f.Model.ID, f.Site.ID, &f.Area.ID, time.Date(2021, 1, 1, 0, 0, 0, 0, time.UTC)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		o, err := s.CreateWorkOrder(ctx, store.NewWorkOrder{Lines: []store.NewWorkOrderLine{
			{DriveID: f.Drive.ID, Task: store.TaskUpgradeEnclosure, Reason: "water", LabourH: 8},
			{DriveID: spare.ID, Task: store.TaskEnergise, Reason: "yearly", LabourH: 1.5}}})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderApproved}); err != nil {
			t.Fatal(err)
		}
		bad := store.EnclosureChange{Mounting: health.MountingCabinet, Cabinet: store.Cabinet{NEMAType: "4X"}}
		_, err = s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderDone, Lines: []store.LineCompletion{
			{LineID: o.Lines[0].ID, Action: store.ActionChangedEnclosure, Enclosure: &bad}}})
		if got := errFields(t, err); !slices.ContainsFunc(got, func(f string) bool { return strings.HasPrefix(f, "lines[0].enclosure.cabinet.") }) {
			t.Errorf("bad enclosure: fields %v", got)
		}
		if d, _ := store.Get[store.Drive](ctx, s, spare.ID); d.LastEnergisedAt != nil {
			t.Errorf("a refused completion energised the spare")
		}
		good := store.EnclosureChange{Mounting: health.MountingCabinet, Cabinet: store.Cabinet{NEMAType: "4X", IPCode: "IP66",
			Cooling: health.CoolingSealed, Material: health.MaterialStainless, SurfaceAreaM2: 3.2}}
		done := s.Now()
		o, err = s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderDone, DoneAt: &done, Lines: []store.LineCompletion{
			{LineID: o.Lines[0].ID, Action: store.ActionChangedEnclosure, Enclosure: &good}}})
		if err != nil {
			t.Fatal(err)
		}
		p, _ := store.Get[store.Position](ctx, s, f.Position.ID)
		if p.Mounting != health.MountingCabinet || p.Cabinet.NEMAType != "4X" || !strings.Contains(p.Notes, "enclosure changed") {
			t.Errorf("position after the enclosure change: %+v", p)
		}
		d, _ := store.Get[store.Drive](ctx, s, spare.ID)
		if d.LastEnergisedAt == nil || !d.LastEnergisedAt.Equal(done) || o.Lines[1].Action != store.ActionEnergised {
			t.Errorf("spare after energising: %+v, line %+v", d, o.Lines[1])
		}
	})
}

// TestSyncProposalsRedoAfter checks that a cause done recently is not
// proposed again, is proposed again after RedoAfter, that manual lines are
// left alone, and that only evaluated kinds may be proposed.
func TestSyncProposalsRedoAfter(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			now := time.Date(2026, 5, 1, 0, 0, 0, 0, time.UTC)
			s := storetest.OpenWith(t, d, store.Options{Now: func() time.Time { return now }})
			ctx := context.Background()
			f := storetest.Build(t, s, "a")
			kinds := []string{store.CauseFinding, store.CauseForecast, store.CauseRecurring}
			due := now.AddDate(0, 0, 10)
			start, end := store.MonthWindow(due)
			line := store.ProposedLine{SiteID: f.Site.ID, AreaID: &f.Area.ID, DriveID: f.Drive.ID, PositionID: &f.Position.ID,
				Task: store.TaskCleanFilters, LabourH: 0.5, Reason: "recurring", CauseKind: store.CauseRecurring, CauseKey: "recurring:x",
				DueAt: due, WindowStart: start, WindowEnd: end}
			manual, err := s.CreateWorkOrder(ctx, store.NewWorkOrder{Lines: []store.NewWorkOrderLine{
				{DriveID: f.Drive.ID, Task: store.TaskInspect, Reason: "hand-made", LabourH: 1}}})
			if err != nil {
				t.Fatal(err)
			}
			res, err := s.SyncProposals(ctx, []store.ProposedLine{line}, store.SyncOptions{At: now, Kinds: kinds})
			if err != nil || res.Proposed != 1 || res.OrdersCreated != 1 {
				t.Fatalf("first sync: %+v %v", res, err)
			}
			page, _ := s.ListWorkOrders(ctx, store.ListQuery{Filters: map[string]string{"status": "open"}})
			var o store.WorkOrder
			for _, x := range page.Items {
				if x.Origin == store.OriginPlanning {
					o = x
				}
			}
			if len(page.Items) != 2 || o.ProposedBy != "system" || o.Title != "Pump hall a, Works a: 1 task due 2026-05" {
				t.Fatalf("orders %+v", page.Items)
			}
			if _, err := s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderApproved}); err != nil {
				t.Fatal(err)
			}
			if _, err := s.ChangeWorkOrder(ctx, o.ID, store.WorkOrderChange{Status: store.OrderDone}); err != nil {
				t.Fatal(err)
			}
			now = now.AddDate(0, 0, 20)
			res, err = s.SyncProposals(ctx, []store.ProposedLine{line}, store.SyncOptions{At: now, Kinds: kinds})
			if err != nil || res.Proposed != 0 {
				t.Errorf("within RedoAfter: %+v %v", res, err)
			}
			now = now.AddDate(0, 0, 20)
			res, err = s.SyncProposals(ctx, []store.ProposedLine{line}, store.SyncOptions{At: now, Kinds: kinds})
			if err != nil || res.Proposed != 1 {
				t.Errorf("after RedoAfter: %+v %v", res, err)
			}
			// The manual order's line has no planning cause: still there.
			if m, _ := s.GetWorkOrder(ctx, manual.ID); m.Status != store.OrderProposed || m.Lines[0].State != store.LineActive {
				t.Errorf("manual order %s, line %s", m.Status, m.Lines[0].State)
			}
			line.CauseKind = store.CauseManual
			if _, err := s.SyncProposals(ctx, []store.ProposedLine{line}, store.SyncOptions{At: now, Kinds: kinds}); err == nil {
				t.Error("a proposal of a kind not evaluated was taken")
			}
		})
	}
}
