package plan

import (
	"bytes"
	"encoding/csv"
	"errors"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/emersion/go-ical"

	"kelvard/health"
	"kelvard/store"
)

// TestICalendarExportParsesBack writes the work orders as iCalendar and
// reads them back with a second, independent iCalendar library
// (github.com/emersion/go-ical), field by field: one VTODO per order with
// UID, DTSTAMP, SUMMARY, DUE, PRIORITY, STATUS, COMPLETED, DTSTART,
// LOCATION, CATEGORIES and a DESCRIPTION carrying the lines and the safety
// caution. The raw text keeps RFC 5545 section 3.1: CRLF line ends and no
// line longer than 75 octets.
func TestICalendarExportParsesBack(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		h := newHotRig(t, d)
		h.refresh()
		_, fanOrder, _ := h.lineFor(findingKey(h.findingsByRule[h.f.Drive.ID]["fan.end_of_life_near"]))
		_, capOrder, _ := h.lineFor(findingKey(h.findingsByRule[h.f.Drive.ID]["capacitor.end_of_life_near"]))
		ref := "PM-7; shift B, north"
		h.change(capOrder.ID, store.WorkOrderChange{Status: store.OrderApproved, ExternalRef: &ref})
		start := capOrder.DueAt.Add(-24 * time.Hour)
		h.change(capOrder.ID, store.WorkOrderChange{Status: store.OrderScheduled, ScheduledFor: &start})
		h.change(fanOrder.ID, store.WorkOrderChange{Status: store.OrderApproved})
		done := h.now
		h.change(fanOrder.ID, store.WorkOrderChange{Status: store.OrderDone, DoneAt: &done})
		orders := h.orders()
		stamp := time.Date(2026, 3, 1, 12, 0, 0, 0, time.UTC)
		var buf bytes.Buffer
		h.must(WriteICalendar(&buf, orders, stamp))
		raw := buf.String()
		for i, line := range strings.SplitAfter(raw, "\r\n") {
			if line == "" {
				continue
			}
			if !strings.HasSuffix(line, "\r\n") {
				t.Errorf("line %d does not end in CRLF: %q", i+1, line)
			}
			if n := len(strings.TrimSuffix(line, "\r\n")); n > 75 {
				t.Errorf("line %d is %d octets long", i+1, n)
			}
		}

		cal, err := ical.NewDecoder(strings.NewReader(raw)).Decode()
		if err != nil {
			t.Fatalf("go-ical cannot read the export: %v\n%s", err, raw)
		}
		if v := cal.Props.Get(ical.PropVersion); v == nil || v.Value != "2.0" || cal.Props.Get(ical.PropProductID) == nil {
			t.Errorf("calendar properties %v", cal.Props)
		}
		byUID := map[string]*ical.Component{}
		for _, c := range cal.Children {
			if c.Name != ical.CompToDo {
				t.Errorf("unexpected component %s", c.Name)
				continue
			}
			uid, err := c.Props.Text(ical.PropUID)
			h.must(err)
			byUID[uid] = c
		}
		if len(byUID) != len(orders) || len(orders) < 3 {
			t.Fatalf("%d VTODOs for %d orders", len(byUID), len(orders))
		}
		text := func(c *ical.Component, name string) string {
			t.Helper()
			v, err := c.Props.Text(name)
			if err != nil {
				t.Errorf("%s: %v", name, err)
			}
			return v
		}
		at := func(c *ical.Component, name string) time.Time {
			t.Helper()
			v, err := c.Props.DateTime(name, time.UTC)
			if err != nil {
				t.Errorf("%s: %v", name, err)
			}
			return v.UTC()
		}
		for _, o := range orders {
			c := byUID["work-order-"+itoa64(o.ID)+"@kelvard"]
			if c == nil {
				t.Errorf("no VTODO for order %d", o.ID)
				continue
			}
			if got := at(c, ical.PropDateTimeStamp); !got.Equal(stamp) {
				t.Errorf("order %d DTSTAMP %s", o.ID, got)
			}
			if got := text(c, ical.PropSummary); got != o.Title {
				t.Errorf("order %d SUMMARY %q, want %q", o.ID, got, o.Title)
			}
			if got := at(c, ical.PropDue); !got.Equal(o.DueAt.Truncate(time.Second)) {
				t.Errorf("order %d DUE %s, want %s", o.ID, got, o.DueAt)
			}
			if p, err := c.Props.Get(ical.PropPriority).Int(); err != nil || p != o.Priority || p < 1 || p > 9 {
				t.Errorf("order %d PRIORITY %d (%v), want %d", o.ID, p, err, o.Priority)
			}
			wantStatus := map[store.WorkOrderStatus]string{store.OrderProposed: "NEEDS-ACTION", store.OrderApproved: "NEEDS-ACTION",
				store.OrderScheduled: "IN-PROCESS", store.OrderDone: "COMPLETED"}[o.Status]
			if got := text(c, ical.PropStatus); got != wantStatus {
				t.Errorf("order %d STATUS %s, want %s", o.ID, got, wantStatus)
			}
			if got := c.Props.Get("X-KELVARD-STATUS"); got == nil || got.Value != string(o.Status) {
				t.Errorf("order %d X-KELVARD-STATUS %v", o.ID, got)
			}
			if got := text(c, ical.PropLocation); got != o.AreaName+", "+o.SiteName {
				t.Errorf("order %d LOCATION %q", o.ID, got)
			}
			var cats []string
			for _, p := range c.Props.Values(ical.PropCategories) {
				l, err := p.TextList()
				h.must(err)
				cats = append(cats, l...)
			}
			var tasks []string
			for _, l := range o.Lines {
				if l.State == store.LineActive && !slices.Contains(tasks, string(l.Task)) {
					tasks = append(tasks, string(l.Task))
				}
			}
			if !slices.Equal(cats, tasks) {
				t.Errorf("order %d CATEGORIES %v, want %v", o.ID, cats, tasks)
			}
			desc := text(c, ical.PropDescription)
			if !strings.Contains(desc, health.SafetyCaution) {
				t.Errorf("order %d DESCRIPTION lacks the caution:\n%s", o.ID, desc)
			}
			for _, l := range o.Lines {
				if !strings.Contains(desc, "drive "+l.DriveSerial+": "+l.Task.Title()) || !strings.Contains(desc, l.Reason) {
					t.Errorf("order %d DESCRIPTION lacks line %d:\n%s", o.ID, l.ID, desc)
				}
			}
			switch o.ID {
			case fanOrder.ID:
				if got := at(c, ical.PropCompleted); !got.Equal(done) {
					t.Errorf("COMPLETED %s, want %s", got, done)
				}
			case capOrder.ID:
				if got := at(c, ical.PropDateTimeStart); !got.Equal(start.Truncate(time.Second)) {
					t.Errorf("DTSTART %s, want %s", got, start)
				}
				if got := text(c, "X-KELVARD-EXTERNAL-REF"); got != ref {
					t.Errorf("X-KELVARD-EXTERNAL-REF %q, want %q", got, ref)
				}
			}
		}
	})
}

// TestWorkOrderCSVRoundTrip exports the orders as CSV and imports the file
// back (nothing changes), then imports status files keyed by id and by
// external reference, refuses bad files whole, and completes an order from
// a file.
func TestWorkOrderCSVRoundTrip(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, d store.Dialect) {
		h := newHotRig(t, d)
		h.refresh()
		orders := h.orders()
		export := func() []byte {
			var buf bytes.Buffer
			h.must(WriteWorkOrdersCSV(&buf, h.orders()))
			return buf.Bytes()
		}
		importCSV := func(data string) (store.StatusImportResult, error) {
			rows, err := ParseStatusCSV(strings.NewReader(data))
			if err != nil {
				return store.StatusImportResult{}, err
			}
			return h.st.ImportWorkOrderStatuses(h.ctx, rows)
		}
		data := export()
		recs, err := csv.NewReader(bytes.NewReader(data)).ReadAll()
		h.must(err)
		lines := 0
		for _, o := range orders {
			lines += len(o.Lines)
		}
		if !slices.Equal(recs[0], WorkOrderColumns) || len(recs) != lines+1 {
			t.Fatalf("export has %d rows for %d lines; header %v", len(recs)-1, lines, recs[0])
		}
		for _, rec := range recs[1:] {
			if rec[len(rec)-1] != health.SafetyCaution {
				t.Errorf("row without the caution: %v", rec)
			}
		}
		res, err := importCSV(string(data))
		h.must(err)
		if res.Rows != lines || res.Orders != len(orders) || res.Changed != 0 || res.Unchanged != len(orders) {
			t.Errorf("re-import of the export: %+v", res)
		}

		_, fanOrder, _ := h.lineFor(findingKey(h.findingsByRule[h.f.Drive.ID]["fan.end_of_life_near"]))
		_, capOrder, _ := h.lineFor(findingKey(h.findingsByRule[h.f.Drive.ID]["capacitor.end_of_life_near"]))
		// Keyed by id: give references, approve one.
		res, err = importCSV("work_order_id,external_ref,status\n" + itoa64(fanOrder.ID) + ",PM-1,approved\n" + itoa64(capOrder.ID) + ",PM-2,\n")
		h.must(err)
		if res.Changed != 2 {
			t.Errorf("import by id: %+v", res)
		}
		o, err := h.st.GetWorkOrder(h.ctx, fanOrder.ID)
		h.must(err)
		if o.ExternalRef != "PM-1" || o.Status != store.OrderApproved || o.ApprovedAt == nil {
			t.Errorf("order after import: %+v", o)
		}
		// Keyed by reference: schedule.
		_, err = importCSV("external_ref,status,scheduled_for\nPM-1,scheduled,2026-04-01\n")
		h.must(err)
		o, _ = h.st.GetWorkOrder(h.ctx, fanOrder.ID)
		if o.Status != store.OrderScheduled || o.ScheduledFor == nil || !o.ScheduledFor.Equal(time.Date(2026, 4, 1, 0, 0, 0, 0, time.UTC)) {
			t.Errorf("scheduled by import: %s %v", o.Status, o.ScheduledFor)
		}
		// A bad row refuses the whole file, naming its line.
		for _, bad := range []struct{ file, field string }{
			{"external_ref,status\nPM-2,approved\nPM-404,approved\n", "external_ref"},
			{"external_ref,status\nPM-2,approved\nPM-1,proposed\n", "status"},
			{"external_ref,status\nPM-2,approved\nPM-2,cancelled\n", "status"},
			{"external_ref,status,scheduled_for\nPM-2,approved,\nPM-1,scheduled,next week\n", "scheduled_for"},
		} {
			_, err := importCSV(bad.file)
			var ve *store.ValidationError
			if !errors.As(err, &ve) || ve.Fields[0].Line != 3 || ve.Fields[0].Field != bad.field {
				t.Errorf("%q: %v, want field %s on line 3", bad.file, err, bad.field)
			}
			if o, _ := h.st.GetWorkOrder(h.ctx, capOrder.ID); o.Status != store.OrderProposed {
				t.Errorf("%q wrote a change: order is %s", bad.file, o.Status)
			}
		}
		// Completing from a file does the lines as planned: the fans of a
		// and c are renewed at done_at.
		fanBefore := currentComponent(h.rig, h.c.ID, health.ComponentFan)
		res, err = importCSV("external_ref,status,done_at\nPM-1,done," + h.now.Format(time.RFC3339) + "\n")
		h.must(err)
		o, _ = h.st.GetWorkOrder(h.ctx, fanOrder.ID)
		fanAfter := currentComponent(h.rig, h.c.ID, health.ComponentFan)
		if res.Changed != 1 || o.Status != store.OrderDone || fanAfter.ID == fanBefore.ID || !fanAfter.InstalledAt.Equal(h.now) {
			t.Errorf("done by import: %+v, order %s, fan %d → %d at %s", res, o.Status, fanBefore.ID, fanAfter.ID, fanAfter.InstalledAt)
		}
		// The export of the new state imports back unchanged.
		res, err = importCSV(string(export()))
		h.must(err)
		if res.Changed != 0 || res.Unchanged != len(orders) {
			t.Errorf("second round trip: %+v", res)
		}
	})
}

// TestParseStatusCSVRefusals checks the status file's own errors.
func TestParseStatusCSVRefusals(t *testing.T) {
	for _, c := range []struct{ file, field string }{
		{"", "body"},
		{"status\napproved\n", "header"},
		{"work_order_id,status\nx,approved\n", "work_order_id"},
		{"work_order_id,status\n3,finished\n", "status"},
		{"external_ref,done_at\nPM-1,yesterday\n", "done_at"},
		{"external_ref,work_order_id\n,\n", "external_ref"},
	} {
		_, err := ParseStatusCSV(strings.NewReader(c.file))
		var ve *store.ValidationError
		if !errors.As(err, &ve) || ve.Fields[0].Field != c.field {
			t.Errorf("%q: %v, want an error on %s", c.file, err, c.field)
		}
	}
	rows, err := ParseStatusCSV(strings.NewReader("\ufeffexternal_ref,status,scheduled_for,extra\nPM-1,scheduled,2026-04-01T06:30:00+02:00,x\n"))
	if err != nil || len(rows) != 1 || rows[0].Line != 2 || !rows[0].ScheduledFor.Equal(time.Date(2026, 4, 1, 4, 30, 0, 0, time.UTC)) {
		t.Errorf("rows %+v, %v", rows, err)
	}
}

// TestEveryRuleHasATask checks that each rule of the catalogue maps to a
// known task, and that the physical remedies of the kinds planning turns
// into parts work map to the task that does it.
func TestEveryRuleHasATask(t *testing.T) {
	for _, r := range health.Catalogue() {
		task, ok := ruleTasks[r.ID]
		if !ok || !task.Valid() {
			t.Errorf("rule %s has no task", r.ID)
		}
	}
	for rule, want := range map[string]store.WorkTask{"capacitor.end_of_life": store.TaskReplaceCapacitors, "fan.end_of_life": store.TaskReplaceFan,
		"storage.reform_required": store.TaskReform, "dc_bus.overvoltage_on_deceleration": store.TaskBrakingOrLongerRamp,
		"enclosure.water": store.TaskUpgradeEnclosure, "derating.carrier": store.TaskLowerCarrierResize, "no.such.rule": store.TaskInspect} {
		if got := TaskForRule(rule); got != want {
			t.Errorf("%s → %s, want %s", rule, got, want)
		}
	}
}

// TestCalendarPeriods checks the calendar-aligned recurring periods.
func TestCalendarPeriods(t *testing.T) {
	at := time.Date(2026, 11, 30, 8, 0, 0, 0, time.UTC)
	for _, c := range []struct {
		months     int
		start, end string
	}{{1, "2026-11-01", "2026-12-01"}, {3, "2026-10-01", "2027-01-01"}, {6, "2026-07-01", "2027-01-01"}, {12, "2026-01-01", "2027-01-01"}} {
		s, e := calendarPeriod(at, c.months)
		if s.Format(time.DateOnly) != c.start || e.Format(time.DateOnly) != c.end {
			t.Errorf("%d months: %s to %s, want %s to %s", c.months, s.Format(time.DateOnly), e.Format(time.DateOnly), c.start, c.end)
		}
	}
}
