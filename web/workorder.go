package web

import (
	"fmt"
	"net/http"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// workOrderPage is one work order: its lines, its history and, for a
// planner, the forms that move it on.
type workOrderPage struct {
	Order   store.WorkOrder
	Lines   []lineView
	Steps   []stepView
	Caution string
	Now     time.Time
	// Error is a refused action's message; Reason and the line forms keep
	// what was typed.
	Error  string
	Reason string
	// Form defaults: today, the schedule date offered, and the earliest
	// completion date the store accepts.
	Today, ScheduleOn, DoneOn, DoneMin              string
	CanApprove, CanSchedule, CanComplete, CanCancel bool
	// Active counts the lines still on the order.
	Active int
}

// lineView is a line with its reason linked to the findings it names and,
// for completing, the choices of what was done.
type lineView struct {
	store.WorkOrderLine
	No      int
	Reason  []textPart
	Actions []choiceCount
	// Spares are the drives in stores at the order's site of the line's
	// drive model, for a drive swap.
	Spares []store.Drive
	Modes  []choiceCount
	Causes []choiceCount
	// Typed values kept after a refused completion.
	Swap          int64
	Mode, Cause   string
	Cap, ESR      string
	Notes         string
	CanSwap       bool
	PositionShown bool
}

// textPart is a piece of text, linked to a finding when FindingID is set.
type textPart struct {
	Text      string
	FindingID int64
}

// findingRef finds mentions of findings in a line's reason ("Finding 81,"
// and "Also: finding 82,").
var findingRef = regexp.MustCompile(`[Ff]inding (\d+)`)

// reasonParts splits a reason into text and finding links.
func reasonParts(s string) []textPart {
	var out []textPart
	last := 0
	for _, m := range findingRef.FindAllStringSubmatchIndex(s, -1) {
		id, err := strconv.ParseInt(s[m[2]:m[3]], 10, 64)
		if err != nil {
			continue
		}
		if m[0] > last {
			out = append(out, textPart{Text: s[last:m[0]]})
		}
		out = append(out, textPart{Text: s[m[0]:m[1]], FindingID: id})
		last = m[1]
	}
	if last < len(s) {
		out = append(out, textPart{Text: s[last:]})
	}
	return out
}

// stepView is one step of an order's history.
type stepView struct {
	What string
	At   time.Time
	By   string
	Note string
}

// workOrder shows one work order.
func (h *Handler) workOrder(w http.ResponseWriter, r *http.Request) {
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
	h.render(w, r, http.StatusOK, "workorder", orderHeading(p.Order), "workorders", p)
}

// orderHeading names an order for titles.
func orderHeading(o store.WorkOrder) string {
	return fmt.Sprintf("Work order %d", o.ID)
}

// loadWorkOrder gathers a work order page: the order with its lines, and
// the spares in stores for lines that may swap a drive.
func (h *Handler) loadWorkOrder(r *http.Request, id int64) (*workOrderPage, error) {
	ctx := r.Context()
	o, err := h.st.GetWorkOrder(ctx, id)
	if err != nil {
		return nil, err
	}
	now := h.st.Now()
	p := &workOrderPage{Order: o, Caution: health.SafetyCaution, Now: now, Today: now.Format(time.DateOnly),
		ScheduleOn: now.AddDate(0, 0, 7).Format(time.DateOnly), DoneOn: now.Format(time.DateOnly),
		DoneMin: o.ProposedAt.AddDate(0, 0, -1).Format(time.DateOnly)}
	if o.ScheduledFor != nil {
		p.ScheduleOn = o.ScheduledFor.UTC().Format(time.DateOnly)
	}
	v := viewerFrom(ctx)
	act := v != nil && v.CanAct
	p.CanApprove = act && o.Status == store.OrderProposed
	p.CanSchedule = act && (o.Status == store.OrderApproved || o.Status == store.OrderScheduled)
	p.CanComplete = act && (o.Status == store.OrderApproved || o.Status == store.OrderScheduled)
	p.CanCancel = act && o.Status.Open()
	p.Steps = orderSteps(o)
	spares, err := h.st.OrderSpares(ctx, o.ID)
	if err != nil {
		return nil, err
	}
	n := 0
	for _, l := range o.Lines {
		lv := lineView{WorkOrderLine: l, Reason: reasonParts(l.Reason), PositionShown: l.PositionID != nil}
		if l.State == store.LineActive {
			n++
			lv.No = n
			lv.Spares = spares[l.DriveID]
			lv.CanSwap = l.PositionID != nil && len(lv.Spares) > 0
			lv.Actions = lineActions(l, lv.CanSwap, "")
			lv.Modes = failureModeChoices("")
			lv.Causes = failureCauseChoices("")
		}
		p.Lines = append(p.Lines, lv)
	}
	p.Active = n
	return p, nil
}

// lineActions lists what may be recorded as done on a line, the task's
// own action first. A drive swap needs a spare; a new enclosure is
// recorded through the API (it needs the cabinet's details).
func lineActions(l store.WorkOrderLine, canSwap bool, chosen store.WorkAction) []choiceCount {
	def := l.Task.DefaultAction()
	list := []store.WorkAction{def}
	for _, a := range []store.WorkAction{store.ActionReplacedCapacitors, store.ActionReplacedFan, store.ActionSwappedDrive,
		store.ActionWorkDone, store.ActionNothingNeeded, store.ActionNotDone} {
		if a == store.ActionSwappedDrive && !canSwap {
			continue
		}
		if !slices.Contains(list, a) {
			list = append(list, a)
		}
	}
	if l.PositionID == nil {
		// A drive in stores is energised or reformed, not swapped.
		for _, a := range []store.WorkAction{store.ActionEnergised, store.ActionReformed} {
			if !slices.Contains(list, a) {
				list = append(list, a)
			}
		}
	}
	if chosen == "" {
		chosen = def
	}
	out := make([]choiceCount, len(list))
	for i, a := range list {
		out[i] = choiceCount{Key: string(a), Label: actionLabel(a), Current: a == chosen}
	}
	return out
}

// actionLabel says a completion action in words.
func actionLabel(a store.WorkAction) string {
	switch a {
	case store.ActionReplacedCapacitors:
		return "Replaced the DC-bus capacitors (restarts their life)"
	case store.ActionReplacedFan:
		return "Replaced the cooling fan (restarts its life)"
	case store.ActionSwappedDrive:
		return "Swapped the drive for a spare from stores"
	case store.ActionEnergised:
		return "Energised the stored drive"
	case store.ActionReformed:
		return "Reformed the capacitors"
	case store.ActionChangedEnclosure:
		return "Changed the enclosure"
	case store.ActionWorkDone:
		return "Did the work as planned"
	case store.ActionNothingNeeded:
		return "Found nothing needed doing"
	case store.ActionNotDone:
		return "Could not do it"
	}
	return words(string(a))
}

func failureModeChoices(chosen string) []choiceCount {
	out := []choiceCount{{Key: "", Label: "No failure found", Current: chosen == ""}}
	for _, m := range health.FailureModes() {
		out = append(out, choiceCount{Key: string(m), Label: modeLabel(string(m)), Current: chosen == string(m)})
	}
	return out
}

func failureCauseChoices(chosen string) []choiceCount {
	out := []choiceCount{{Key: "", Label: "Not known or no failure", Current: chosen == ""}}
	for _, c := range health.FailureCauses() {
		if c == health.CauseUnknown {
			continue
		}
		out = append(out, choiceCount{Key: string(c), Label: capitalise(words(string(c))), Current: chosen == string(c)})
	}
	return out
}

// modeLabel names a failure mode (or "any") for people.
func modeLabel(m string) string {
	switch m {
	case "dc_bus_capacitors":
		return "DC-bus capacitors"
	case "any":
		return "Any failure"
	}
	return capitalise(words(m))
}

func capitalise(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// orderSteps lists an order's history, oldest first.
func orderSteps(o store.WorkOrder) []stepView {
	steps := []stepView{{What: "Proposed", At: o.ProposedAt, By: o.ProposedBy}}
	if o.ApprovedAt != nil {
		steps = append(steps, stepView{What: "Approved", At: *o.ApprovedAt, By: o.ApprovedBy})
	}
	if o.ScheduledAt != nil {
		s := stepView{What: "Scheduled", At: *o.ScheduledAt, By: o.ScheduledBy}
		if o.ScheduledFor != nil {
			s.Note = "for " + date(*o.ScheduledFor)
		}
		steps = append(steps, s)
	}
	if o.DoneAt != nil {
		steps = append(steps, stepView{What: "Done", At: *o.DoneAt, By: o.DoneBy})
	}
	if o.CancelledAt != nil {
		steps = append(steps, stepView{What: "Cancelled", At: *o.CancelledAt, By: o.CancelledBy, Note: o.StatusReason})
	}
	if o.WithdrawnAt != nil {
		steps = append(steps, stepView{What: "Withdrawn by planning: every cause cleared", At: *o.WithdrawnAt})
	}
	slices.SortStableFunc(steps, func(a, b stepView) int { return a.At.Compare(b.At) })
	return steps
}
