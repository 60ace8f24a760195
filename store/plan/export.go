package plan

import (
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	ics "github.com/arran4/golang-ical"

	"kelvard/health"
	"kelvard/store"
)

// WorkOrderColumns are the columns of the work order CSV export, one row
// per line (an order without lines has one row with the line columns
// empty). The status import reads work_order_id, external_ref, status,
// scheduled_for, done_at and reason and ignores the rest, so an export can
// be edited and imported back.
var WorkOrderColumns = []string{"work_order_id", "external_ref", "status", "site", "area", "title", "window_start", "due_at",
	"priority", "risk_score", "scheduled_for", "approved_by", "approved_at", "done_by", "done_at", "reason",
	"line_id", "position", "drive_serial", "task", "task_title", "parts", "labour_h", "line_reason", "cause_key",
	"line_state", "cause_cleared_at", "outcome", "action", "caution"}

// WriteWorkOrdersCSV writes orders in the export format.
func WriteWorkOrdersCSV(w io.Writer, orders []store.WorkOrder) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(WorkOrderColumns); err != nil {
		return err
	}
	for _, o := range orders {
		head := []string{itoa(o.ID), o.ExternalRef, string(o.Status), o.SiteName, o.AreaName, o.Title, ts(&o.WindowStart),
			ts(&o.DueAt), strconv.Itoa(o.Priority), num(o.RiskScore), ts(o.ScheduledFor), o.ApprovedBy, ts(o.ApprovedAt),
			o.DoneBy, ts(o.DoneAt), o.StatusReason}
		if len(o.Lines) == 0 {
			if err := cw.Write(append(head, "", "", "", "", "", "", "", "", "", "", "", "", "", health.SafetyCaution)); err != nil {
				return err
			}
		}
		for _, l := range o.Lines {
			row := append(append([]string{}, head...), itoa(l.ID), l.PositionTag, l.DriveSerial, string(l.Task), l.Task.Title(),
				l.Parts, num(l.LabourH), l.Reason, l.CauseKey, l.State, ts(l.CauseClearedAt), l.Outcome, string(l.Action),
				health.SafetyCaution)
			if err := cw.Write(row); err != nil {
				return err
			}
		}
	}
	cw.Flush()
	return cw.Error()
}

// ParseStatusCSV reads a status file: a header naming at least
// work_order_id or external_ref, and any of status, scheduled_for (RFC
// 3339 or a date, YYYY-MM-DD), done_at and reason; other columns are
// ignored. Errors name the line and column; nothing is returned with them.
func ParseStatusCSV(r io.Reader) ([]store.WorkOrderStatusRow, error) {
	cr := csv.NewReader(r)
	cr.FieldsPerRecord = -1
	header, err := cr.Read()
	if err == io.EOF {
		return nil, store.Invalid("body", "the file is empty: give a header row")
	}
	if err != nil {
		return nil, store.Invalid("body", "not CSV: %v", err)
	}
	col := map[string]int{}
	for i, h := range header {
		col[strings.TrimSpace(strings.TrimPrefix(h, "\ufeff"))] = i
	}
	_, hasID := col["work_order_id"]
	_, hasRef := col["external_ref"]
	if !hasID && !hasRef {
		return nil, store.Invalid("header", "name a work_order_id or external_ref column")
	}
	var rows []store.WorkOrderStatusRow
	var bad []store.FieldError
	for {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		line, _ := cr.FieldPos(0)
		if err != nil {
			return nil, store.Invalid("body", "not CSV at line %d: %v", line, err)
		}
		get := func(name string) string {
			if i, ok := col[name]; ok && i < len(rec) {
				return strings.TrimSpace(rec[i])
			}
			return ""
		}
		row := store.WorkOrderStatusRow{Line: line, ExternalRef: get("external_ref"), Status: store.WorkOrderStatus(get("status")), Reason: get("reason")}
		fail := func(field, format string, args ...any) {
			bad = append(bad, store.FieldError{Field: field, Line: line, Reason: fmt.Sprintf(format, args...)})
		}
		if v := get("work_order_id"); v != "" {
			id, err := strconv.ParseInt(v, 10, 64)
			if err != nil || id <= 0 {
				fail("work_order_id", "must be a positive integer")
			}
			row.ID = id
		}
		if row.ID == 0 && row.ExternalRef == "" {
			fail("external_ref", "give external_ref or work_order_id")
		}
		if row.Status != "" && !validStatus(row.Status) {
			fail("status", "must be one of %v", store.WorkOrderStatuses())
		}
		for _, tc := range []struct {
			name string
			into **time.Time
		}{{"scheduled_for", &row.ScheduledFor}, {"done_at", &row.DoneAt}} {
			if v := get(tc.name); v != "" {
				t, err := parseWhen(v)
				if err != nil {
					fail(tc.name, "must be an RFC 3339 time or a date (YYYY-MM-DD)")
					continue
				}
				*tc.into = &t
			}
		}
		rows = append(rows, row)
	}
	if len(bad) > 0 {
		return nil, &store.ValidationError{Fields: bad}
	}
	return rows, nil
}

func validStatus(s store.WorkOrderStatus) bool {
	for _, v := range store.WorkOrderStatuses() {
		if s == v {
			return true
		}
	}
	return false
}

func parseWhen(v string) (time.Time, error) {
	if t, err := time.Parse(time.RFC3339Nano, v); err == nil {
		return t.UTC(), nil
	}
	return time.Parse(time.DateOnly, v)
}

// WriteICalendar writes orders as an RFC 5545 calendar with one VTODO per
// order: UID work-order-ID@kelvard, DTSTAMP, SUMMARY (the title), DUE,
// PRIORITY (1 highest to 9, store.PriorityFor), STATUS (NEEDS-ACTION,
// IN-PROCESS once scheduled, COMPLETED with COMPLETED, CANCELLED),
// LOCATION (area and site), CATEGORIES (one per task), DTSTART (the scheduled
// date, when not after DUE), DESCRIPTION (the lines and the safety
// caution), and X-KELVARD-STATUS, X-KELVARD-EXTERNAL-REF and
// X-KELVARD-SCHEDULED-FOR for a maintenance system that reads them.
func WriteICalendar(w io.Writer, orders []store.WorkOrder, stamp time.Time) error {
	cal := ics.NewCalendarFor("kelvard")
	cal.SetProductId("-//kelvard//work orders//EN")
	cal.SetMethod(ics.MethodPublish)
	for _, o := range orders {
		t := cal.AddTodo(fmt.Sprintf("work-order-%d@kelvard", o.ID))
		t.SetDtStampTime(stamp)
		t.SetCreatedTime(o.CreatedAt)
		t.SetModifiedAt(o.UpdatedAt)
		t.SetSummary(o.Title)
		t.SetDueAt(o.DueAt)
		t.SetPriority(o.Priority)
		switch o.Status {
		case store.OrderDone:
			t.SetStatus(ics.ObjectStatusCompleted)
			if o.DoneAt != nil {
				t.SetCompletedAt(*o.DoneAt)
			}
		case store.OrderCancelled, store.OrderWithdrawn:
			t.SetStatus(ics.ObjectStatusCancelled)
		case store.OrderScheduled:
			t.SetStatus(ics.ObjectStatusInProcess)
		default:
			t.SetStatus(ics.ObjectStatusNeedsAction)
		}
		if o.ScheduledFor != nil {
			if !o.ScheduledFor.After(o.DueAt) {
				t.SetStartAt(*o.ScheduledFor)
			}
			t.SetProperty(ics.ComponentProperty("X-KELVARD-SCHEDULED-FOR"), o.ScheduledFor.UTC().Format("20060102T150405Z"))
		}
		where := o.SiteName
		if o.AreaName != "" {
			where = o.AreaName + ", " + o.SiteName
		}
		t.SetLocation(where)
		// One CATEGORIES property per task (RFC 5545 lets it recur): the
		// library escapes the commas of a single list.
		seen := map[store.WorkTask]bool{}
		for _, l := range o.Lines {
			if l.State == store.LineActive && !seen[l.Task] {
				seen[l.Task] = true
				t.AddCategory(string(l.Task))
			}
		}
		t.SetProperty(ics.ComponentProperty("X-KELVARD-STATUS"), string(o.Status))
		if o.ExternalRef != "" {
			t.SetProperty(ics.ComponentProperty("X-KELVARD-EXTERNAL-REF"), o.ExternalRef)
		}
		t.SetDescription(Description(o))
	}
	// RFC 5545 section 3.1: lines end in CRLF and fold at 75 octets.
	return cal.SerializeTo(w, ics.WithNewLine("\r\n"), ics.WithLineLength(75))
}

// Description is an order in plain text: what to do where, and the safety
// caution.
func Description(o store.WorkOrder) string {
	var b strings.Builder
	fmt.Fprintf(&b, "Work order %d (%s), priority %d, due %s.\n", o.ID, o.Status, o.Priority, o.DueAt.Format(time.DateOnly))
	for _, l := range o.Lines {
		if l.State != store.LineActive {
			continue
		}
		where := l.PositionTag
		if where == "" {
			where = "stores"
		}
		fmt.Fprintf(&b, "- %s, drive %s: %s (%.1f h", where, l.DriveSerial, l.Task.Title(), l.LabourH)
		if l.Parts != "" {
			fmt.Fprintf(&b, "; parts: %s", l.Parts)
		}
		fmt.Fprintf(&b, "). %s\n", l.Reason)
		if l.CauseClearedAt != nil {
			fmt.Fprintf(&b, "  Cause cleared on %s.\n", l.CauseClearedAt.Format(time.DateOnly))
		}
	}
	b.WriteString("Caution: " + health.SafetyCaution)
	return b.String()
}

// ForecastItemColumns are the columns of the forecast CSV.
var ForecastItemColumns = []string{"month", "site", "area", "position", "drive_serial", "model", "component", "cycle",
	"end_of_life", "end_of_life_earliest", "end_of_life_latest", "overdue", "life_used_fraction", "action",
	"parts_cost", "labour_h", "labour_cost", "total_cost", "in_budget"}

// WriteForecastCSV writes the forecast items, one row each.
func WriteForecastCSV(w io.Writer, f Forecast) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(ForecastItemColumns); err != nil {
		return err
	}
	for _, it := range f.Items {
		if err := cw.Write([]string{it.Month, it.Site, it.Area, it.Position, it.Serial, it.Model, string(it.Component),
			strconv.Itoa(it.Cycle), ts(&it.EndOfLife), ts(&it.EndOfLifeEarliest), ts(it.EndOfLifeLatest),
			strconv.FormatBool(it.Overdue), num(it.LifeUsedFraction), string(it.Action), num(it.PartsCost), num(it.LabourH),
			num(it.LabourCost), num(it.TotalCost), strconv.FormatBool(it.InBudget)}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// BudgetColumns are the columns of the budget CSV.
var BudgetColumns = []string{"month", "site", "capacitor_refurbishments", "drive_replacements", "fan_replacements",
	"parts_cost", "labour_h", "labour_cost", "total_cost"}

// WriteBudgetCSV writes the budget by month and site, then one row per
// month over all sites (site "all"), then the horizon total.
func WriteBudgetCSV(w io.Writer, f Forecast) error {
	cw := csv.NewWriter(w)
	if err := cw.Write(BudgetColumns); err != nil {
		return err
	}
	rows := append([]BudgetRow{}, f.Budget...)
	for _, m := range f.Months {
		m.Site = "all"
		rows = append(rows, m)
	}
	total := f.Totals.Expected
	total.Site = "all"
	rows = append(rows, total)
	for _, r := range rows {
		if err := cw.Write([]string{r.Month, r.Site, strconv.Itoa(r.CapacitorRefurbishments), strconv.Itoa(r.DriveReplacements),
			strconv.Itoa(r.FanReplacements), num(r.PartsCost), num(r.LabourH), num(r.LabourCost), num(r.TotalCost)}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

func itoa(v int64) string { return strconv.FormatInt(v, 10) }

func num(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

func ts(t *time.Time) string {
	if t == nil || t.IsZero() {
		return ""
	}
	return t.UTC().Format(time.RFC3339Nano)
}
