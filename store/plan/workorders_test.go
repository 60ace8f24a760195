package plan

import (
	"errors"
	"strings"
	"testing"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// hotRig is the fixture drive a and two more drives of its model, c in the
// same area and b in a second area of the same site, all run for 1000 h at
// 105 °C air and rated current: the capacitors (core 110 °C, life 5000 h)
// have about 4000 h left and the fans (1768 h at 105 °C) about 770 h, so
// the assessment raises capacitor.end_of_life_near and
// fan.end_of_life_near on each.
type hotRig struct {
	*rig
	b, c           store.Drive
	posB, posC     store.Position
	gallery        store.Area
	findingsByRule map[int64]map[string]store.Finding
}

func newHotRig(t *testing.T, d store.Dialect) *hotRig {
	t.Helper()
	r := newRig(t, d)
	h := &hotRig{rig: r}
	var err error
	h.gallery, err = store.Create[store.Area](r.ctx, r.st, func(v *store.Area) error {
		v.SiteID, v.Name = r.f.Site.ID, "Gallery a"
		return nil
	})
	r.must(err)
	h.c, h.posC = r.addDrive("SN-c", r.f.Model.ID, r.f.Area.ID, t0.Add(-24*time.Hour))
	h.b, h.posB = r.addDrive("SN-b", r.f.Model.ID, h.gallery.ID, t0.Add(-24*time.Hour))
	for _, id := range []int64{h.b.ID, h.c.ID} {
		r.refit(id, t0)
	}
	hot := func(int) float64 { return 105 }
	for _, p := range []int64{r.f.Position.ID, h.posB.ID, h.posC.ID} {
		r.ingest(p, 0, 1000, hot, 77)
	}
	r.assess()
	h.loadFindings()
	for _, id := range []int64{r.f.Drive.ID, h.b.ID, h.c.ID} {
		for _, rule := range []string{"capacitor.end_of_life_near", "fan.end_of_life_near"} {
			if f, ok := h.findingsByRule[id][rule]; !ok || !f.PhysicalWork {
				t.Fatalf("drive %d has no physical %s finding: %+v", id, rule, h.findingsByRule[id])
			}
		}
	}
	return h
}

func (h *hotRig) loadFindings() {
	h.t.Helper()
	page, err := h.st.ListFindings(h.ctx, store.ListQuery{Limit: store.MaxLimit})
	h.must(err)
	h.findingsByRule = map[int64]map[string]store.Finding{}
	for _, f := range page.Items {
		if h.findingsByRule[f.DriveID] == nil {
			h.findingsByRule[f.DriveID] = map[string]store.Finding{}
		}
		h.findingsByRule[f.DriveID][f.Rule] = f
	}
}

func (h *hotRig) refresh() store.SyncResult {
	h.t.Helper()
	res, _, err := Refresh(h.ctx, h.st, Config{})
	h.must(err)
	return res
}

func (h *hotRig) orders() []store.WorkOrder {
	h.t.Helper()
	out, err := h.st.AllWorkOrders(h.ctx, map[string]string{"status": ""})
	h.must(err)
	withdrawn, err := h.st.AllWorkOrders(h.ctx, map[string]string{"status": string(store.OrderWithdrawn)})
	h.must(err)
	return append(out, withdrawn...)
}

// lineFor finds the line with a cause key, and its order.
func (h *hotRig) lineFor(key string) (store.WorkOrderLine, store.WorkOrder, bool) {
	for _, o := range h.orders() {
		for _, l := range o.Lines {
			if l.CauseKey == key {
				return l, o, true
			}
		}
	}
	return store.WorkOrderLine{}, store.WorkOrder{}, false
}

func (h *hotRig) suppress(driveID int64, rule string) store.Finding {
	h.t.Helper()
	f := h.findingsByRule[driveID][rule]
	until := h.now.Add(30 * 24 * time.Hour)
	_, err := h.st.SuppressFinding(h.ctx, f.ID, store.FindingAction{Reason: "test", Until: &until})
	h.must(err)
	return f
}

func findingKey(f store.Finding) string { return "finding:" + itoa64(f.ID) }

func (h *hotRig) change(id int64, ch store.WorkOrderChange) store.WorkOrder {
	h.t.Helper()
	o, err := h.st.ChangeWorkOrder(h.ctx, id, ch)
	h.must(err)
	return o
}

// TestProposalsGroupedNotDuplicatedAndWithdrawn runs planning over three
// hot drives and checks the grouping by site, area and due window, that a
// second run proposes nothing new, that a forecast item yields to the
// finding of the same task, and the withdrawal rules.
func TestProposalsGroupedNotDuplicatedAndWithdrawn(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		h := newHotRig(t, d)
		// One planning pass, as the nightly job runs it.
		first, drives, err := Refresh(h.ctx, h.st, Config{})
		h.must(err)
		if drives != 3 || first.Proposed == 0 {
			t.Errorf("planning pass over %d drives proposed %+v", drives, first)
		}

		// Every open physical finding has one line: its own, or the line
		// of the same task on the same drive that names it.
		orders := h.orders()
		byKey := map[string]int{}
		var all []store.WorkOrderLine
		for _, o := range orders {
			for _, l := range o.Lines {
				byKey[l.CauseKey]++
				all = append(all, l)
			}
		}
		causes := 0
		for _, byRule := range h.findingsByRule {
			for _, f := range byRule {
				if !f.PhysicalWork {
					continue
				}
				if byKey[findingKey(f)] == 1 {
					causes++
					continue
				}
				named := 0
				for _, l := range all {
					if l.DriveID == f.DriveID && l.Task == TaskForRule(f.Rule) && strings.Contains(l.Reason, "finding "+itoa64(f.ID)+", ") {
						named++
					}
				}
				if byKey[findingKey(f)] != 0 || named != 1 {
					t.Errorf("finding %d (%s) has %d lines and is named by %d", f.ID, f.Rule, byKey[findingKey(f)], named)
				}
			}
		}
		// The fans' forecast items are inside the lead-time window (42 days
		// + 30) but the findings already ask for the same task.
		data, err := h.st.LoadPlanningData(h.ctx)
		h.must(err)
		fc := BuildForecast(data, Config{}, data.At)
		inWindow := 0
		for _, it := range fc.Items {
			if it.Cycle == 1 && it.Component == health.ComponentFan && it.EndOfLifeEarliest.Before(data.At.Add(72*24*time.Hour)) {
				inWindow++
			}
		}
		if inWindow != 3 {
			t.Fatalf("%d fan forecast items in the window, want 3", inWindow)
		}
		for key := range byKey {
			if strings.HasPrefix(key, "forecast:") {
				t.Errorf("forecast line %s proposed beside the finding's", key)
			}
		}
		if len(byKey) != causes {
			t.Errorf("%d lines for %d findings that cause one", len(byKey), causes)
		}

		// Grouping: one proposed order per site, area and month; a and c
		// share the fan order of the pump hall; b's lines are in the
		// gallery's orders.
		type group struct {
			site, area int64
			window     time.Time
		}
		seen := map[group]int64{}
		for _, o := range orders {
			g := group{o.SiteID, *o.AreaID, o.WindowStart}
			if other, dup := seen[g]; dup {
				t.Errorf("orders %d and %d share site, area and window", other, o.ID)
			}
			seen[g] = o.ID
			for _, l := range o.Lines {
				if start, _ := store.MonthWindow(l.DueAt); !start.Equal(o.WindowStart) {
					t.Errorf("line %d due %s in order %d of window %s", l.ID, l.DueAt, o.ID, o.WindowStart)
				}
			}
			if !strings.Contains(o.Caution, "DC bus") {
				t.Errorf("order %d carries no caution", o.ID)
			}
		}
		fanA, orderA, _ := h.lineFor(findingKey(h.findingsByRule[h.f.Drive.ID]["fan.end_of_life_near"]))
		fanC, orderC, _ := h.lineFor(findingKey(h.findingsByRule[h.c.ID]["fan.end_of_life_near"]))
		fanB, orderB, _ := h.lineFor(findingKey(h.findingsByRule[h.b.ID]["fan.end_of_life_near"]))
		if orderA.ID != orderC.ID || orderA.ID == orderB.ID || *orderB.AreaID != h.gallery.ID {
			t.Errorf("fan lines in orders a %d, c %d, b %d", orderA.ID, orderC.ID, orderB.ID)
		}
		if fanA.Task != store.TaskReplaceFan || fanA.LabourH != 0.75 || !strings.Contains(fanA.Parts, "fan kit") ||
			!strings.Contains(fanA.Reason, "fan.end_of_life_near") || fanC.DriveSerial != "SN-c" || fanB.PositionTag != h.posB.Tag {
			t.Errorf("fan lines %+v / %+v / %+v", fanA, fanC, fanB)
		}
		// Priority from the risk score (RFC 5545 scale, store.PriorityFor).
		a, err := h.st.LatestAssessment(h.ctx, h.f.Drive.ID)
		h.must(err)
		if fanA.Priority != store.PriorityFor(a.RiskScore) || fanA.RiskScore != a.RiskScore || orderA.Priority > fanA.Priority {
			t.Errorf("priority %d (order %d) for risk %.1f", fanA.Priority, orderA.Priority, a.RiskScore)
		}

		// A second run proposes nothing new.
		res := h.refresh()
		if res.Proposed != 0 || res.Withdrawn != 0 || res.OrdersCreated != 0 || res.Duplicates != 3 {
			t.Errorf("second run %+v", res)
		}

		// A cleared cause is withdrawn while its order is proposed…
		capB := h.suppress(h.b.ID, "capacitor.end_of_life_near")
		res = h.refresh()
		line, order, _ := h.lineFor(findingKey(capB))
		if res.Withdrawn != 1 || line.State != store.LineWithdrawn || line.WithdrawnAt == nil {
			t.Errorf("withdrawal: %+v, line %+v", res, line)
		}
		// … and an order left with no active line is withdrawn whole.
		active := 0
		for _, l := range order.Lines {
			if l.State == store.LineActive {
				active++
			}
		}
		if active == 0 && order.Status != store.OrderWithdrawn {
			t.Errorf("order %d has no active line but is %s", order.ID, order.Status)
		}
		for _, l := range order.Lines {
			if l.State == store.LineActive {
				fd := h.findingsByRule[h.b.ID]
				for rule, f := range fd {
					if findingKey(f) == l.CauseKey {
						h.suppress(h.b.ID, rule)
					}
				}
			}
		}
		res = h.refresh()
		_, order, _ = h.lineFor(findingKey(capB))
		if order.Status != store.OrderWithdrawn || order.WithdrawnAt == nil || !strings.Contains(order.StatusReason, "every cause cleared") {
			t.Errorf("order %d: %s (%s) after every cause cleared; run %+v", order.ID, order.Status, order.StatusReason, res)
		}

		// An approved order keeps its line and notes that the cause
		// cleared; the fan's forecast item does not take its place.
		h.change(orderA.ID, store.WorkOrderChange{Status: store.OrderApproved})
		h.suppress(h.f.Drive.ID, "fan.end_of_life_near")
		res = h.refresh()
		fanA, orderA, _ = h.lineFor(fanA.CauseKey)
		if res.CauseCleared != 1 || fanA.State != store.LineActive || fanA.CauseClearedAt == nil || orderA.Status != store.OrderApproved {
			t.Errorf("approved order: run %+v, line %+v", res, fanA)
		}
		for _, o := range h.orders() {
			for _, l := range o.Lines {
				if strings.HasPrefix(l.CauseKey, "forecast:cooling_fan:") && l.DriveID == h.f.Drive.ID {
					t.Errorf("forecast line %s proposed while the approved order holds the task", l.CauseKey)
				}
			}
		}
		if !strings.Contains(Description(orderA), "Cause cleared") {
			t.Errorf("the description does not note the cleared cause:\n%s", Description(orderA))
		}
	})
}

// TestCompletingOrderRestartsComponentLife follows a finding to a proposal,
// approves, schedules and completes it, and checks that the capacitor bank
// was renewed in the register and that the next assessment starts its life
// from the completion: 100 h at 55 °C air and rated current afterwards use
// 100/160 000 of a life (10-degree rule, core 60 °C).
func TestCompletingOrderRestartsComponentLife(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		r.ingest(r.f.Position.ID, 0, 1000, func(int) float64 { return 105 }, 77)
		r.assess()
		before, err := r.st.LatestAssessment(r.ctx, r.f.Drive.ID)
		r.must(err)
		if before.CapacitorLifeUsedFraction < 0.19 {
			t.Fatalf("capacitor life used %.3f before the work", before.CapacitorLifeUsedFraction)
		}
		h := &hotRig{rig: r}
		h.loadFindings()
		h.refresh()
		capFinding := h.findingsByRule[r.f.Drive.ID]["capacitor.end_of_life_near"]
		line, order, ok := h.lineFor(findingKey(capFinding))
		if !ok || line.Task != store.TaskReplaceCapacitors || order.Status != store.OrderProposed {
			t.Fatalf("no proposal for the capacitor finding: %+v", order)
		}
		oldCap := currentComponent(r, r.f.Drive.ID, health.ComponentCapacitors)
		oldFan := currentComponent(r, r.f.Drive.ID, health.ComponentFan)

		// Completing a proposed order is refused: approve and schedule first.
		_, err = r.st.ChangeWorkOrder(r.ctx, order.ID, store.WorkOrderChange{Status: store.OrderDone})
		var ve *store.ValidationError
		if !errors.As(err, &ve) || ve.Fields[0].Field != "status" {
			t.Fatalf("done from proposed: %v", err)
		}
		o := h.change(order.ID, store.WorkOrderChange{Status: store.OrderApproved})
		if o.ApprovedAt == nil || o.ApprovedBy != "system" {
			t.Errorf("approval not recorded: %+v", o)
		}
		when := r.now.Add(48 * time.Hour)
		o = h.change(order.ID, store.WorkOrderChange{Status: store.OrderScheduled, ScheduledFor: &when})
		if o.ScheduledFor == nil || !o.ScheduledFor.Equal(when) || o.ScheduledAt == nil {
			t.Errorf("schedule not recorded: %+v", o)
		}
		done := r.now
		found, esr := 2300.0, 61.5
		o = h.change(order.ID, store.WorkOrderChange{Status: store.OrderDone, DoneAt: &done, Lines: []store.LineCompletion{{
			LineID: line.ID, FoundCapacitanceUF: &found, FoundESRMilliohm: &esr, Part: "cap kit", InitialCapacitanceUF: 3000,
			Notes: "bulging cans"}}})
		if o.Status != store.OrderDone || o.DoneAt == nil || !o.DoneAt.Equal(done) || o.DoneBy != "system" {
			t.Fatalf("order after completion: %+v", o)
		}
		var got store.WorkOrderLine
		for _, l := range o.Lines {
			if l.ID == line.ID {
				got = l
			}
		}
		if got.Action != store.ActionReplacedCapacitors || got.Outcome != "done" || got.NewComponentID == nil ||
			*got.FoundCapacitanceUF != found || *got.FoundESRMilliohm != esr || got.CompletionNotes != "bulging cans" {
			t.Fatalf("completed line %+v", got)
		}
		oldAfter, err := store.Get[store.Component](r.ctx, r.st, oldCap.ID)
		r.must(err)
		newCap := currentComponent(r, r.f.Drive.ID, health.ComponentCapacitors)
		if oldAfter.RemovedAt == nil || !oldAfter.RemovedAt.Equal(done) || newCap.ID != *got.NewComponentID ||
			!newCap.InstalledAt.Equal(done) || newCap.Part != "cap kit" || newCap.InitialCapacitanceUF != 3000 {
			t.Errorf("components: old %+v, new %+v", oldAfter, newCap)
		}
		if fan := currentComponent(r, r.f.Drive.ID, health.ComponentFan); fan.ID != oldFan.ID {
			t.Errorf("the fan was renewed by an order that did not hold it")
		}
		events, err := store.List[store.Event](r.ctx, r.st, store.ListQuery{Filters: map[string]string{
			"drive_id": itoa64(r.f.Drive.ID), "type": string(health.EventComponentReplaced)}})
		r.must(err)
		if len(events.Items) != 1 || !events.Items[0].At.Equal(done) || events.Items[0].Component != health.ComponentCapacitors {
			t.Errorf("replacement events %+v", events.Items)
		}
		audit, err := r.st.Audit(r.ctx, store.AuditQuery{Resource: "work-orders", ResourceID: order.ID})
		r.must(err)
		var actions []string
		for _, e := range audit.Items {
			actions = append(actions, e.Action)
		}
		if strings.Join(actions, ",") != "done,scheduled,approved,propose" && strings.Join(actions, ",") != "done,scheduled,approved,plan,propose" {
			t.Errorf("audit of the order: %v", actions)
		}

		// The next assessment starts the bank's life at the completion.
		r.ingest(r.f.Position.ID, 1000, 1100, func(int) float64 { return 55 }, 77)
		r.assess()
		after, err := r.st.LatestAssessment(r.ctx, r.f.Drive.ID)
		r.must(err)
		relClose(t, "capacitor life used after the work", after.CapacitorLifeUsedFraction, 100/capLifeH(60), 1e-9)
		if after.FanLifeUsedFraction < before.FanLifeUsedFraction {
			t.Errorf("the fan's life restarted too: %.3f → %.3f", before.FanLifeUsedFraction, after.FanLifeUsedFraction)
		}
	})
}

func currentComponent(r *rig, driveID int64, kind health.ComponentKind) store.Component {
	r.t.Helper()
	page, err := store.List[store.Component](r.ctx, r.st, store.ListQuery{Filters: map[string]string{"drive_id": itoa64(driveID), "kind": string(kind)}})
	r.must(err)
	for _, c := range page.Items {
		if c.RemovedAt == nil {
			return c
		}
	}
	r.t.Fatalf("drive %d has no %s fitted", driveID, kind)
	return store.Component{}
}

// TestSwapThroughWorkOrder replaces a drive by a hand-written order: the
// spare goes into the position and the unit comes out for repair, through
// Tx.MoveDrive, in the completion's transaction.
func TestSwapThroughWorkOrder(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		r := newRig(t, d)
		r.ingest(r.f.Position.ID, 0, 10, func(int) float64 { return 40 }, 50)
		r.assess()
		spare, err := store.Create[store.Drive](r.ctx, r.st, func(v *store.Drive) error {
			v.Serial, v.ModelID, v.SiteID, v.StoresAreaID, v.ManufacturedAt = "SPARE-1", r.f.Model.ID, r.f.Site.ID, &r.f.Area.ID, t0.AddDate(-1, 0, 0)
			return nil
		})
		r.must(err)
		other, _ := r.addDrive("SN-x", r.f.Model.ID, r.f.Area.ID, t0.Add(-48*time.Hour))
		o, err := r.st.CreateWorkOrder(r.ctx, store.NewWorkOrder{Lines: []store.NewWorkOrderLine{{DriveID: r.f.Drive.ID,
			Task: store.TaskReplaceDrive, Reason: "trips on over-current; swap and send to the workshop", LabourH: 4}}})
		r.must(err)
		if o.Status != store.OrderProposed || o.Origin != store.OriginManual || len(o.Lines) != 1 || *o.AreaID != r.f.Area.ID {
			t.Fatalf("manual order %+v", o)
		}
		h := &hotRig{rig: r}
		h.change(o.ID, store.WorkOrderChange{Status: store.OrderApproved})
		lineID := o.Lines[0].ID
		done := r.now

		// A unit standing elsewhere is not a spare: nothing is written.
		_, err = r.st.ChangeWorkOrder(r.ctx, o.ID, store.WorkOrderChange{Status: store.OrderDone, DoneAt: &done,
			Lines: []store.LineCompletion{{LineID: lineID, Action: store.ActionSwappedDrive, SwapDriveID: &other.ID}}})
		var ve *store.ValidationError
		if !errors.As(err, &ve) || ve.Fields[0].Field != "lines[0].swap_drive_id" {
			t.Fatalf("swap with an installed unit: %v", err)
		}
		if got, _ := r.st.GetWorkOrder(r.ctx, o.ID); got.Status != store.OrderApproved {
			t.Errorf("order is %s after a refused completion", got.Status)
		}

		o = h.change(o.ID, store.WorkOrderChange{Status: store.OrderDone, DoneAt: &done, Lines: []store.LineCompletion{{
			LineID: lineID, Action: store.ActionSwappedDrive, SwapDriveID: &spare.ID, FoundFailureMode: health.FailurePowerModule}}})
		if o.Lines[0].SwapDriveID == nil || *o.Lines[0].SwapDriveID != spare.ID || o.Lines[0].FoundFailureMode != health.FailurePowerModule {
			t.Errorf("line %+v", o.Lines[0])
		}
		out, err := store.Get[store.Drive](r.ctx, r.st, r.f.Drive.ID)
		r.must(err)
		in, err := store.Get[store.Drive](r.ctx, r.st, spare.ID)
		r.must(err)
		if out.Status != health.StatusInRepair || out.PositionID != nil || in.Status != health.StatusInstalled || *in.PositionID != r.f.Position.ID {
			t.Errorf("after the swap: removed %+v, spare %+v", out, in)
		}
		at, err := r.st.InstalledAt(r.ctx, r.f.Position.ID, done.Add(time.Second))
		r.must(err)
		if at != spare.ID {
			t.Errorf("position holds drive %d, want the spare %d", at, spare.ID)
		}
		// What was found is a failure event, so fleet statistics count it.
		fails, err := store.List[store.Event](r.ctx, r.st, store.ListQuery{Filters: map[string]string{"drive_id": itoa64(r.f.Drive.ID), "type": "failure"}})
		r.must(err)
		if len(fails.Items) != 1 || fails.Items[0].FailureMode != health.FailurePowerModule || !fails.Items[0].At.Equal(done) {
			t.Errorf("failure events %+v", fails.Items)
		}
	})
}
