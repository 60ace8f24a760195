package web

import (
	"errors"
	"fmt"
	"net/http"
	"regexp"
	"strconv"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// A planner moves a work order on with these forms; each posts back to the
// order and, when the store refuses, shows the order again with the
// reason and what was typed. The store (ChangeWorkOrder) checks every
// step, so the pages and the API share the rules.

// approveOrder approves a proposed order.
func (h *Handler) approveOrder(w http.ResponseWriter, r *http.Request) {
	h.changeOrder(w, r, "approved", func(int64, *workOrderPage) (store.WorkOrderChange, error) {
		return store.WorkOrderChange{Status: store.OrderApproved, Reason: strings.TrimSpace(r.PostForm.Get("reason"))}, nil
	})
}

// scheduleOrder schedules an approved order for a date, or moves the date
// of a scheduled one.
func (h *Handler) scheduleOrder(w http.ResponseWriter, r *http.Request) {
	h.changeOrder(w, r, "scheduled", func(_ int64, p *workOrderPage) (store.WorkOrderChange, error) {
		v := r.PostForm.Get("scheduled_for")
		p.ScheduleOn = v
		day, err := time.Parse(time.DateOnly, v)
		if err != nil {
			return store.WorkOrderChange{}, store.Invalid("scheduled_for", "must be a date such as 2027-01-31")
		}
		return store.WorkOrderChange{Status: store.OrderScheduled, ScheduledFor: &day}, nil
	})
}

// cancelOrder cancels an open order; the reason is required.
func (h *Handler) cancelOrder(w http.ResponseWriter, r *http.Request) {
	h.changeOrder(w, r, "cancelled", func(_ int64, p *workOrderPage) (store.WorkOrderChange, error) {
		return store.WorkOrderChange{Status: store.OrderCancelled, Reason: strings.TrimSpace(r.PostForm.Get("reason"))}, nil
	})
}

// completeOrder records an approved or scheduled order as done, with what
// was found and done on each line.
func (h *Handler) completeOrder(w http.ResponseWriter, r *http.Request) {
	h.changeOrder(w, r, "completed", func(_ int64, p *workOrderPage) (store.WorkOrderChange, error) {
		return h.readCompletion(r, p)
	})
}

// readCompletion reads the completion form: the day the work was done and,
// per active line, the action, the spare swapped in, the failure found
// with its cause, the as-found capacitance and ESR, and notes. It fills
// the page's form values so a refusal shows them again.
func (h *Handler) readCompletion(r *http.Request, p *workOrderPage) (store.WorkOrderChange, error) {
	f := r.PostForm
	ch := store.WorkOrderChange{Status: store.OrderDone}
	var bad []store.FieldError
	now := h.st.Now()
	p.DoneOn = f.Get("done_on")
	day, err := time.Parse(time.DateOnly, p.DoneOn)
	switch {
	case err != nil:
		bad = append(bad, store.FieldError{Field: "done_on", Reason: "must be a date such as 2027-01-31"})
	case day.Format(time.DateOnly) == now.Format(time.DateOnly):
		// Done today: now dates the new parts and the moves.
		ch.DoneAt = &now
	default:
		// An earlier day: midday, so the date reads the same in any zone
		// near UTC.
		at := day.Add(12 * time.Hour)
		if at.After(now) {
			at = now
		}
		ch.DoneAt = &at
	}
	for i := range p.Lines {
		lv := &p.Lines[i]
		if lv.State != store.LineActive {
			continue
		}
		key := strconv.FormatInt(lv.ID, 10)
		c := store.LineCompletion{LineID: lv.ID, Action: store.WorkAction(f.Get("action-" + key)),
			FoundFailureMode: health.FailureMode(f.Get("mode-" + key)), FoundFailureCause: health.FailureCause(f.Get("cause-" + key)),
			Notes: strings.TrimSpace(f.Get("notes-" + key))}
		lv.Actions = lineActions(lv.WorkOrderLine, lv.CanSwap, c.Action)
		lv.Mode, lv.Cause, lv.Notes = string(c.FoundFailureMode), string(c.FoundFailureCause), c.Notes
		lv.Modes, lv.Causes = failureModeChoices(lv.Mode), failureCauseChoices(lv.Cause)
		lv.Cap, lv.ESR = strings.TrimSpace(f.Get("cap-"+key)), strings.TrimSpace(f.Get("esr-"+key))
		field := func(name string) string { return fmt.Sprintf("lines[%d].%s", lv.No-1, name) }
		if c.FoundFailureMode != "" && !c.FoundFailureMode.Valid() {
			bad = append(bad, store.FieldError{Field: field("found_failure_mode"), Reason: "is not a failure mode kelvard knows"})
		}
		if c.FoundFailureCause != "" && !c.FoundFailureCause.Valid() {
			bad = append(bad, store.FieldError{Field: field("found_failure_cause"), Reason: "is not a cause kelvard knows"})
		}
		if c.FoundFailureMode != "" && c.FoundFailureCause == "" {
			c.FoundFailureCause = health.CauseUnknown
		}
		for _, m := range []struct {
			name, v string
			into    **float64
		}{{"found_capacitance_uf", lv.Cap, &c.FoundCapacitanceUF}, {"found_esr_milliohm", lv.ESR, &c.FoundESRMilliohm}} {
			if m.v == "" {
				continue
			}
			x, err := strconv.ParseFloat(m.v, 64)
			if err != nil {
				bad = append(bad, store.FieldError{Field: field(m.name), Reason: "must be a number"})
				continue
			}
			*m.into = &x
		}
		if v := f.Get("swap-" + key); v != "" {
			id, err := strconv.ParseInt(v, 10, 64)
			if err != nil || id <= 0 {
				bad = append(bad, store.FieldError{Field: field("swap_drive_id"), Reason: "must name a drive"})
			} else {
				lv.Swap = id
				if c.Action == store.ActionSwappedDrive {
					c.SwapDriveID = &id
				}
			}
		}
		ch.Lines = append(ch.Lines, c)
	}
	if len(bad) > 0 {
		return ch, &store.ValidationError{Fields: bad}
	}
	return ch, nil
}

// changeOrder runs a planner's change to an order and returns to the
// order with a notice, or shows it again with what was wrong.
func (h *Handler) changeOrder(w http.ResponseWriter, r *http.Request, done string, build func(id int64, p *workOrderPage) (store.WorkOrderChange, error)) {
	id, ok := pathID(r)
	if !ok {
		h.errorPage(w, r, http.StatusNotFound, "There is no such work order.")
		return
	}
	p, err := h.loadWorkOrder(r, id)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	p.Reason = strings.TrimSpace(r.PostForm.Get("reason"))
	ch, err := build(id, p)
	if err == nil {
		_, err = h.st.ChangeWorkOrder(r.Context(), id, ch)
	}
	var ve *store.ValidationError
	if errors.As(err, &ve) {
		p.Error = orderError(ve, p)
		h.render(w, r, http.StatusUnprocessableEntity, "workorder", orderHeading(p.Order), "workorders", p)
		return
	}
	if err != nil {
		h.fail(w, r, err)
		return
	}
	http.Redirect(w, r, fmt.Sprintf("/work-orders/%d?done=%s", id, done), http.StatusSeeOther)
}

// lineField matches the store's names of a completion's line fields.
var lineField = regexp.MustCompile(`^lines\[(\d+)\]\.(.+)$`)

// orderError says a refused change in a sentence, naming lines by their
// number and task on the page rather than by the API's field names.
func orderError(ve *store.ValidationError, p *workOrderPage) string {
	parts := make([]string, len(ve.Fields))
	for i, f := range ve.Fields {
		name := words(f.Field)
		if m := lineField.FindStringSubmatch(f.Field); m != nil {
			n, _ := strconv.Atoi(m[1])
			name = fmt.Sprintf("line %d", n+1)
			for _, l := range p.Lines {
				if l.No == n+1 {
					name = fmt.Sprintf("line %d (%s, drive %s)", l.No, strings.ToLower(l.TaskTitle[:1])+l.TaskTitle[1:], l.DriveSerial)
				}
			}
			name += ": " + words(strings.ReplaceAll(m[2], ".", " "))
		}
		parts[i] = name + " " + f.Reason
	}
	return "This was not saved. Please correct: " + strings.Join(parts, "; ") + "."
}
