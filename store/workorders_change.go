package store

import (
	"context"
	"errors"
	"fmt"
	"slices"
	"strings"
	"time"

	"kelvard/health"
)

// WorkOrderChange is a planner's change to a work order: a status step
// (approved, scheduled, done, cancelled), the scheduled date, the external
// reference of the plant's maintenance system, notes, and for done what was
// found and done on each line.
type WorkOrderChange struct {
	Status       WorkOrderStatus `json:"status"`
	ScheduledFor *time.Time      `json:"scheduled_for"`
	ExternalRef  *string         `json:"external_ref"`
	Notes        *string         `json:"notes"`
	// Reason is required to cancel and kept with any step.
	Reason string `json:"reason"`
	// DoneAt is when the work was done (default now); it dates the new
	// components and the moves.
	DoneAt *time.Time `json:"done_at"`
	// Lines says what was found and done per line; a line not named was
	// done as planned (WorkTask.DefaultAction).
	Lines []LineCompletion `json:"lines"`
}

// LineCompletion is what was found and done on one line.
type LineCompletion struct {
	LineID int64 `json:"line_id"`
	// Action is what was done (default the task's DefaultAction).
	Action WorkAction `json:"action"`
	// FoundFailureMode records a failure found (a failure event at DoneAt,
	// so fleet statistics see it); FoundFailureCause its cause (default
	// unknown).
	FoundFailureMode   health.FailureMode  `json:"found_failure_mode"`
	FoundFailureCause  health.FailureCause `json:"found_failure_cause"`
	FoundCapacitanceUF *float64            `json:"found_capacitance_uf"`
	FoundESRMilliohm   *float64            `json:"found_esr_milliohm"`
	// SwapDriveID is the spare put in for swapped_drive; RemovedStatus the
	// status of the unit taken out (default in_repair).
	SwapDriveID   *int64             `json:"swap_drive_id"`
	RemovedStatus health.DriveStatus `json:"removed_status"`
	// Part, InitialCapacitanceUF and InitialESRMilliohm describe a new
	// component fitted by replaced_capacitors or replaced_fan.
	Part                 string  `json:"part"`
	InitialCapacitanceUF float64 `json:"initial_capacitance_uf"`
	InitialESRMilliohm   float64 `json:"initial_esr_milliohm"`
	// Enclosure is the position's new mounting and cabinet for
	// changed_enclosure.
	Enclosure *EnclosureChange `json:"enclosure"`
	Notes     string           `json:"notes"`
}

// EnclosureChange is a position's new mounting and cabinet.
type EnclosureChange struct {
	Mounting health.Mounting `json:"mounting"`
	Cabinet  Cabinet         `json:"cabinet"`
}

// ChangeWorkOrder applies a planner's change in one transaction, recording
// who (the context's principal) and when, and audits it. Completing an
// order applies each line's action to the register through the same
// validated, audited operations the API uses (CreateIn, UpdateIn,
// Tx.MoveDrive), so a replaced component restarts its life and the drives
// touched are marked for recompute.
func (s *Store) ChangeWorkOrder(ctx context.Context, id int64, ch WorkOrderChange) (WorkOrder, error) {
	var out WorkOrder
	err := s.InTx(ctx, func(t *Tx) error {
		var err error
		out, err = changeWorkOrder(ctx, t, id, ch)
		return err
	})
	if err != nil {
		return WorkOrder{}, fmt.Errorf("change work order %d: %w", id, err)
	}
	return out, nil
}

func changeWorkOrder(ctx context.Context, t *Tx, id int64, ch WorkOrderChange) (WorkOrder, error) {
	tx := t.db
	var o WorkOrder
	err := scoped(ctx, lockRow(tx, t.dialect).Model(&WorkOrder{}), workOrderInfo).Where("id = ?", id).Take(&o).Error
	if errNoRows(err) {
		return o, fmt.Errorf("work order %d: %w", id, ErrNotFound)
	}
	if err != nil {
		return o, translate(err)
	}
	before := []WorkOrder{o}
	if err := fillWorkOrders(tx, before); err != nil {
		return o, err
	}
	lines := before[0].Lines
	now := utc(tx.NowFunc())
	actor := PrincipalFrom(ctx).Actor
	var fe fieldErrors
	if ch.ExternalRef != nil {
		ref := strings.TrimSpace(*ch.ExternalRef)
		fe.text("external_ref", ref, false, 100)
		o.ExternalRef = ref
	}
	if ch.Notes != nil {
		fe.text("notes", *ch.Notes, false, 4000)
		o.Notes = *ch.Notes
	}
	fe.text("reason", ch.Reason, false, 1000)
	if ch.Reason != "" {
		o.StatusReason = ch.Reason
	}
	target := ch.Status
	if target == "" {
		target = o.Status
	}
	if !slices.Contains(WorkOrderStatuses(), target) {
		fe.add("status", "must be one of [approved scheduled done cancelled]")
		return o, fe.err()
	}
	if len(ch.Lines) > 0 && target != OrderDone {
		fe.add("lines", "are only for completing an order (status done)")
	}
	if ch.DoneAt != nil && target != OrderDone {
		fe.add("done_at", "is only for completing an order (status done)")
	}
	if ch.ScheduledFor != nil && target != OrderScheduled {
		fe.add("scheduled_for", "is only for scheduling an order (status scheduled)")
	}
	step := func(from ...WorkOrderStatus) bool {
		if slices.Contains(from, o.Status) {
			return true
		}
		fe.add("status", "a %s order cannot become %s (allowed from %v)", o.Status, target, from)
		return false
	}
	switch target {
	case o.Status:
		if target == OrderScheduled && ch.ScheduledFor != nil {
			d := utc(*ch.ScheduledFor)
			o.ScheduledFor, o.ScheduledAt, o.ScheduledBy = &d, &now, actor
		}
	case OrderProposed, OrderWithdrawn:
		fe.add("status", "%s is set by planning, not by a change", target)
	case OrderApproved:
		if step(OrderProposed) {
			o.Status, o.ApprovedAt, o.ApprovedBy = OrderApproved, &now, actor
		}
	case OrderScheduled:
		if step(OrderApproved) {
			if ch.ScheduledFor == nil {
				fe.add("scheduled_for", "is required to schedule an order")
			} else {
				d := utc(*ch.ScheduledFor)
				o.Status, o.ScheduledFor, o.ScheduledAt, o.ScheduledBy = OrderScheduled, &d, &now, actor
			}
		}
	case OrderCancelled:
		if step(OrderProposed, OrderApproved, OrderScheduled) {
			if strings.TrimSpace(ch.Reason) == "" {
				fe.add("reason", "is required to cancel an order")
			}
			o.Status, o.CancelledAt, o.CancelledBy = OrderCancelled, &now, actor
		}
	case OrderDone:
		if step(OrderApproved, OrderScheduled) {
			doneAt := now
			if ch.DoneAt != nil {
				doneAt = utc(*ch.DoneAt)
			}
			if doneAt.After(now.Add(5 * time.Minute)) {
				fe.add("done_at", "must not lie in the future")
			}
			if doneAt.Before(o.ProposedAt.Add(-24 * time.Hour)) {
				fe.add("done_at", "must not be before the order was proposed (%s)", o.ProposedAt.Format(time.RFC3339))
			}
			plans := planCompletions(&fe, lines, ch.Lines)
			if err := fe.err(); err != nil {
				return o, err
			}
			for i := range plans {
				if err := completeLine(ctx, t, o, &plans[i], doneAt); err != nil {
					return o, err
				}
			}
			o.Status, o.DoneAt, o.DoneBy = OrderDone, &doneAt, actor
		}
	}
	if err := fe.err(); err != nil {
		return o, err
	}
	if err := tx.Save(&o).Error; err != nil {
		return o, translate(err)
	}
	after := []WorkOrder{o}
	if err := fillWorkOrders(tx, after); err != nil {
		return o, err
	}
	action := "update"
	if target != before[0].Status {
		action = string(target)
	}
	if err := writeAudit(ctx, tx, action, "work-orders", o.ID, &before[0], &after[0]); err != nil {
		return o, err
	}
	return after[0], nil
}

// completion is one active line and what completing it does.
type completion struct {
	line  WorkOrderLine
	c     LineCompletion
	index int // in the change's lines, -1 when defaulted
}

// planCompletions pairs the active lines with the completions given,
// defaulting the rest, and checks the completions' fields.
func planCompletions(fe *fieldErrors, lines []WorkOrderLine, given []LineCompletion) []completion {
	byID := map[int64]int{}
	for i, c := range given {
		f := fmt.Sprintf("lines[%d]", i)
		if _, dup := byID[c.LineID]; dup {
			fe.add(f+".line_id", "names line %d twice", c.LineID)
		}
		byID[c.LineID] = i
		if !slices.ContainsFunc(lines, func(l WorkOrderLine) bool { return l.ID == c.LineID && l.State == LineActive }) {
			fe.add(f+".line_id", "no active line %d on this order", c.LineID)
		}
	}
	var out []completion
	for _, l := range lines {
		if l.State != LineActive {
			continue
		}
		cp := completion{line: l, index: -1}
		if i, ok := byID[l.ID]; ok {
			cp.c, cp.index = given[i], i
		}
		cp.c.LineID = l.ID
		if cp.c.Action == "" {
			cp.c.Action = l.Task.DefaultAction()
		}
		f := fmt.Sprintf("lines[%d]", max(cp.index, 0))
		if !slices.Contains(WorkActions(), cp.c.Action) {
			fe.add(f+".action", "must be one of %v", WorkActions())
		}
		if cp.c.FoundCapacitanceUF != nil {
			fe.rangeCheck(f+".found_capacitance_uf", *cp.c.FoundCapacitanceUF, 0, 1e7)
		}
		if cp.c.FoundESRMilliohm != nil {
			fe.rangeCheck(f+".found_esr_milliohm", *cp.c.FoundESRMilliohm, 0, 1e5)
		}
		fe.text(f+".notes", cp.c.Notes, false, 4000)
		fe.text(f+".part", cp.c.Part, false, 100)
		if cp.c.Action == ActionSwappedDrive && cp.c.SwapDriveID == nil {
			fe.add(f+".swap_drive_id", "is required for swapped_drive: the spare put in")
		}
		if cp.c.Action == ActionChangedEnclosure && cp.c.Enclosure == nil {
			fe.add(f+".enclosure", "is required for changed_enclosure: the position's new mounting and cabinet")
		}
		if (cp.c.Action == ActionSwappedDrive || cp.c.Action == ActionChangedEnclosure) && l.PositionID == nil {
			fe.add(f+".action", "%s needs a line at a position", cp.c.Action)
		}
		out = append(out, cp)
	}
	return out
}

// completeLine applies one line's action to the register at doneAt and
// records the outcome on the line. Validation errors name the line.
func completeLine(ctx context.Context, t *Tx, o WorkOrder, cp *completion, doneAt time.Time) error {
	l := cp.line
	c := cp.c
	prefix := fmt.Sprintf("lines[%d].", max(cp.index, 0))
	note := fmt.Sprintf("Work order %d", o.ID)
	if c.Notes != "" {
		note += ": " + c.Notes
	}
	drive, err := GetIn[Drive](ctx, t, l.DriveID)
	if err != nil {
		return err
	}
	switch c.Action {
	case ActionReplacedCapacitors, ActionReplacedFan:
		kind := health.ComponentCapacitors
		if c.Action == ActionReplacedFan {
			kind = health.ComponentFan
		}
		var old Component
		err := t.db.Where("drive_id = ? AND kind = ? AND removed_at IS NULL", l.DriveID, kind).Order("installed_at DESC").Take(&old).Error
		switch {
		case err == nil:
			if _, _, err := UpdateIn[Component](ctx, t, old.ID, func(v *Component) error { v.RemovedAt = &doneAt; return nil }); err != nil {
				return prefixed(prefix, err)
			}
		case !errNoRows(err):
			return fmt.Errorf("find the %s of drive %d: %w", kind, l.DriveID, translate(err))
		}
		nc, err := CreateIn[Component](ctx, t, func(v *Component) error {
			v.DriveID, v.Kind, v.InstalledAt, v.Part, v.Notes = l.DriveID, kind, doneAt, c.Part, note
			v.InitialCapacitanceUF, v.InitialESRMilliohm = c.InitialCapacitanceUF, c.InitialESRMilliohm
			return nil
		})
		if err != nil {
			return prefixed(prefix, err)
		}
		l.NewComponentID = &nc.ID
		if _, err := CreateIn[Event](ctx, t, func(v *Event) error {
			v.DriveID, v.PositionID, v.At, v.Type, v.Component, v.Notes = l.DriveID, drive.PositionID, doneAt, health.EventComponentReplaced, kind, note
			return nil
		}); err != nil {
			return prefixed(prefix, err)
		}
	case ActionSwappedDrive:
		if drive.PositionID == nil || *drive.PositionID != *l.PositionID {
			return Invalid(prefix+"action", "drive %s no longer stands at position %d", drive.Serial, *l.PositionID)
		}
		spare, err := GetIn[Drive](ctx, t, *c.SwapDriveID)
		if IsNotFound(err) {
			return Invalid(prefix+"swap_drive_id", "no drive with id %d", *c.SwapDriveID)
		} else if err != nil {
			return err
		}
		if spare.Status != health.StatusInStores {
			return Invalid(prefix+"swap_drive_id", "drive %s is %s; a spare must be in stores", spare.Serial, spare.Status)
		}
		status := c.RemovedStatus
		if status == "" {
			status = health.StatusInRepair
		}
		if _, err := t.MoveDrive(ctx, l.DriveID, Move{At: doneAt, Status: status, Notes: note}); err != nil {
			return prefixed(prefix, err)
		}
		if _, err := t.MoveDrive(ctx, spare.ID, Move{PositionID: l.PositionID, At: doneAt, Notes: note}); err != nil {
			return prefixed(prefix, err)
		}
		l.SwapDriveID = &spare.ID
	case ActionEnergised, ActionReformed:
		if _, _, err := UpdateIn[Drive](ctx, t, l.DriveID, func(v *Drive) error { v.LastEnergisedAt = &doneAt; return nil }); err != nil {
			return prefixed(prefix, err)
		}
	case ActionChangedEnclosure:
		enc := c.Enclosure
		if _, _, err := UpdateIn[Position](ctx, t, *l.PositionID, func(v *Position) error {
			v.Mounting, v.Cabinet = enc.Mounting, enc.Cabinet
			if v.Notes != "" {
				v.Notes += "\n"
			}
			v.Notes += note + ": enclosure changed."
			return nil
		}); err != nil {
			return prefixed(prefix+"enclosure.", err)
		}
	}
	if c.FoundFailureMode != "" {
		if _, err := CreateIn[Event](ctx, t, func(v *Event) error {
			v.DriveID, v.PositionID, v.At, v.Type, v.Notes = l.DriveID, drive.PositionID, doneAt, health.EventFailure, note+": found on completion."
			v.FailureMode, v.FailureCause = c.FoundFailureMode, c.FoundFailureCause
			return nil
		}); err != nil {
			return prefixed(prefix, err)
		}
	}
	l.Outcome = "done"
	if c.Action == ActionNotDone {
		l.Outcome = "not_done"
	}
	l.Action, l.FoundFailureMode = c.Action, c.FoundFailureMode
	l.FoundCapacitanceUF, l.FoundESRMilliohm, l.CompletionNotes = c.FoundCapacitanceUF, c.FoundESRMilliohm, c.Notes
	if err := t.db.Save(&l).Error; err != nil {
		return fmt.Errorf("record line %d: %w", l.ID, translate(err))
	}
	return nil
}

// prefixed puts prefix before every field a validation error names, so an
// error in a register write made by a completion names its line.
func prefixed(prefix string, err error) error {
	var ve *ValidationError
	if !errors.As(err, &ve) {
		return err
	}
	out := &ValidationError{Fields: make([]FieldError, len(ve.Fields))}
	for i, f := range ve.Fields {
		f.Field = prefix + f.Field
		out.Fields[i] = f
	}
	return out
}
