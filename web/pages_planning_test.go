package web

import (
	"context"
	"fmt"
	"net/http"
	"net/url"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/PuerkitoBio/goquery"

	"kelvard/health"
	"kelvard/store"
	"kelvard/store/plan"
)

// openOrders lists the open work orders with their lines.
func openOrders(t *testing.T, f *fleet) []store.WorkOrder {
	t.Helper()
	orders, err := f.st.AllWorkOrders(context.Background(), map[string]string{"status": "open"})
	if err != nil {
		t.Fatal(err)
	}
	return orders
}

// orderWith finds an open order of the status whose lines pass has, and
// none of whose lines is on a drive in avoid.
func orderWith(t *testing.T, f *fleet, status store.WorkOrderStatus, has func(store.WorkOrderLine) bool, avoid ...int64) store.WorkOrder {
	t.Helper()
	for _, o := range openOrders(t, f) {
		if o.Status != status {
			continue
		}
		ok, clash := false, false
		for _, l := range o.Lines {
			ok = ok || has(l)
			clash = clash || slices.Contains(avoid, l.DriveID)
		}
		if ok && !clash {
			return o
		}
	}
	t.Fatalf("no %s work order with the line wanted", status)
	return store.WorkOrder{}
}

func hasTask(task store.WorkTask) func(store.WorkOrderLine) bool {
	return func(l store.WorkOrderLine) bool { return l.Task == task }
}

// riskiestOrder is the open order carrying the riskiest drive's most
// urgent line: what a newcomer is to approve.
func riskiestOrder(t *testing.T, f *fleet) (store.FleetRow, int64) {
	t.Helper()
	r := riskiest(t, f)
	lines, err := f.st.WorkLines(context.Background(), store.WorkLinesFilter{DriveID: r.DriveID}, 10)
	if err != nil || len(lines) == 0 || !lines[0].OrderStatus.Open() {
		t.Fatalf("the riskiest drive %s has no open work order line: %v %v", r.Serial, lines, err)
	}
	return r, lines[0].WorkOrderID
}

// capacitorDriveIDs are the drives with a capacitor replacement proposed:
// the browser test completes that order, so the handler tests leave it.
func capacitorDriveIDs(t *testing.T, f *fleet) []int64 {
	var out []int64
	for _, o := range openOrders(t, f) {
		for _, l := range o.Lines {
			if l.Task == store.TaskReplaceCapacitors {
				for _, m := range o.Lines {
					out = append(out, m.DriveID)
				}
			}
		}
	}
	return out
}

func testWorkOrders(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	ctx := context.Background()
	doc := c.page("/work-orders")
	if doc.Find("title").Text() != "Work orders · kelvard" || text(doc.Find(`nav[aria-label="Main"] a[aria-current="page"]`)) != "Work orders" {
		t.Error("the work orders page is not marked in the navigation")
	}
	view, err := f.st.WorkOrdersList(ctx, store.WorkOrdersFilter{}, demoNow, 500, 0)
	if err != nil {
		t.Fatal(err)
	}
	rows := doc.Find("table.orders tbody tr")
	if rows.Length() != len(view.Rows) || rows.Length() < 10 {
		t.Fatalf("%d orders listed, %d open in the store", rows.Length(), len(view.Rows))
	}
	// Earliest due first, each linking to its order, with its status,
	// priority and labour.
	var prev time.Time
	rows.Each(func(i int, r *goquery.Selection) {
		o := view.Rows[i]
		if href := r.Find("th a").AttrOr("href", ""); href != fmt.Sprintf("/work-orders/%d", o.ID) {
			t.Errorf("row %d links %q, want order %d", i+1, href, o.ID)
		}
		if o.DueAt.Before(prev) {
			t.Errorf("row %d due %s before row %d", i+1, o.DueAt, i)
		}
		prev = o.DueAt
		cells := r.Find("td")
		if text(cells.Eq(1)) != string(o.Status) || !strings.HasPrefix(text(cells.Eq(3)), strconv.Itoa(o.Priority)+" (") ||
			text(cells.Eq(4)) != strconv.FormatInt(o.ActiveLines, 10) {
			t.Errorf("row %d: %q", i+1, text(r))
		}
	})
	if doc.Find("main > .caution").Length() != 1 {
		t.Error("the work order list proposes physical work without the caution")
	}
	doc.Find("form.filters select").Each(func(_ int, s *goquery.Selection) {
		if doc.Find(`label[for="`+s.AttrOr("id", "-")+`"]`).Length() != 1 {
			t.Errorf("filter %s has no label", s.AttrOr("name", "?"))
		}
	})
	// The counts add up to the open orders and link to the filters.
	var open int
	doc.Find("ul.counts a.count").Each(func(i int, a *goquery.Selection) {
		n, _ := strconv.Atoi(text(a.Find(".n")))
		if i < 3 {
			open += n
		}
	})
	if open != len(view.Rows) {
		t.Errorf("counts by status add to %d, want %d", open, len(view.Rows))
	}
	// Filters: a site, a status, a due window; each keeps to its rows.
	places, _ := f.st.Places(ctx)
	site := places[siteIndex(t, places, "Boosters")].Site
	for _, tc := range []struct {
		query string
		keep  func(r *goquery.Selection) bool
	}{
		{"site=" + strconv.FormatInt(site.ID, 10), func(r *goquery.Selection) bool { return strings.Contains(text(r.Find("td").Eq(0)), site.Name) }},
		{"status=proposed", func(r *goquery.Selection) bool { return text(r.Find("td").Eq(1)) == "proposed" }},
		{"due=30", func(r *goquery.Selection) bool {
			fields := strings.Fields(text(r.Find("td").Eq(2)))
			d, err := time.Parse("2 Jan 2006", strings.Join(fields[:min(3, len(fields))], " "))
			return err == nil && !d.After(demoNow.AddDate(0, 0, 30))
		}},
	} {
		doc := c.page("/work-orders?" + tc.query)
		rows := doc.Find("table.orders tbody tr")
		if rows.Length() == 0 {
			t.Errorf("%s: no orders", tc.query)
		}
		rows.Each(func(i int, r *goquery.Selection) {
			if !tc.keep(r) {
				t.Errorf("%s: row %d does not match: %s", tc.query, i+1, text(r))
			}
		})
		if doc.Find(`form.filters a[href="/work-orders"]`).Length() != 1 {
			t.Errorf("%s: no way to clear the filters", tc.query)
		}
	}
	if doc := c.page("/work-orders?status=done"); doc.Find("table.orders").Length() != 0 && doc.Find("p.empty").Length() != 0 {
		t.Error("done orders: both a table and the empty note")
	}
	for _, bad := range []string{"status=finished", "site=x", "due=7", "page=0"} {
		if res, _ := c.get("/work-orders?" + bad); res.StatusCode != http.StatusBadRequest {
			t.Errorf("%s: %d", bad, res.StatusCode)
		}
	}
	// The fleet page counts the open orders and links to them.
	fleetDoc := c.page("/fleet")
	if a := fleetDoc.Find(`section[aria-labelledby="work-h"] a[href="/work-orders?status=proposed"]`); a.Length() != 1 {
		t.Error("the fleet page does not link the proposed work orders")
	}
}

func testWorkOrder(t *testing.T, f *fleet) {
	ctx := context.Background()
	r, id := riskiestOrder(t, f)
	o, err := f.st.GetWorkOrder(ctx, id)
	if err != nil {
		t.Fatal(err)
	}
	v := f.signedIn(t, f.viewer)
	doc := v.page(fmt.Sprintf("/work-orders/%d", id))
	if !strings.Contains(text(doc.Find("h1")), fmt.Sprintf("Work order %d", id)) || text(doc.Find("h1 .status")) != string(o.Status) {
		t.Errorf("heading %q", text(doc.Find("h1")))
	}
	if doc.Find("main > .caution").Length() != 1 || !strings.Contains(text(doc.Find("main > .caution")), "verify zero voltage on the DC bus") {
		t.Error("the order shows no safety caution")
	}
	rows := doc.Find("table.lines tbody tr")
	if rows.Length() != len(o.Lines) {
		t.Fatalf("%d lines shown, order has %d", rows.Length(), len(o.Lines))
	}
	found := false
	rows.Each(func(i int, row *goquery.Selection) {
		l := o.Lines[i]
		cells := row.Find("td")
		if text(cells.Eq(0)) != l.Task.Title() || text(cells.Eq(1)) != l.DriveSerial || cells.Eq(1).Find("a").AttrOr("href", "") != fmt.Sprintf("/drives/%d", l.DriveID) {
			t.Errorf("line %d: %q", i+1, text(row))
		}
		if l.PositionID != nil && cells.Eq(2).Find("a").AttrOr("href", "") != fmt.Sprintf("/positions/%d", *l.PositionID) {
			t.Errorf("line %d: position not linked", i+1)
		}
		if text(cells.Eq(4)) != trimNum(l.LabourH, 1)+" h" || !strings.HasPrefix(text(cells.Eq(6)), strconv.Itoa(l.Priority)+" (") {
			t.Errorf("line %d labour %q, priority %q", i+1, text(cells.Eq(4)), text(cells.Eq(6)))
		}
		if l.FindingID != nil {
			if cells.Eq(5).Find(fmt.Sprintf(`a[href="/findings/%d"]`, *l.FindingID)).Length() != 1 {
				t.Errorf("line %d does not link its finding %d", i+1, *l.FindingID)
			}
			found = found || l.DriveID == r.DriveID
		}
		if l.Parts != "" && text(cells.Eq(3)) != l.Parts {
			t.Errorf("line %d parts %q, want %q", i+1, text(cells.Eq(3)), l.Parts)
		}
	})
	if !found {
		t.Errorf("the riskiest drive %s's line with its finding is not on order %d", r.Serial, id)
	}
	if doc.Find("ol.steps li").Length() < 1 || !strings.Contains(text(doc.Find("ol.steps")), "Proposed") {
		t.Error("no history")
	}
	// A viewer sees the order and may not act on it.
	if doc.Find("main form").Length() != 0 || !strings.Contains(text(doc.Find("main")), "you may look at this order") {
		t.Error("a viewer is offered forms on the order")
	}
	// A planner is offered the next step, every field labelled and every
	// form carrying the form token.
	p := f.signedIn(t, f.planner)
	doc = p.page(fmt.Sprintf("/work-orders/%d", id))
	if o.Status == store.OrderProposed && doc.Find(`form[action$="/approve"] button`).Length() != 1 {
		t.Error("the planner is not offered the approval")
	}
	doc.Find("main form").Each(func(_ int, fm *goquery.Selection) {
		if fm.AttrOr("method", "") != "post" || fm.Find(`input[name="csrf"]`).AttrOr("value", "") != p.csrf {
			t.Errorf("form %s lacks the form token", fm.AttrOr("action", "?"))
		}
		fm.Find("input:not([type=hidden]), select, textarea").Each(func(_ int, in *goquery.Selection) {
			if doc.Find(`label[for="`+in.AttrOr("id", "-")+`"]`).Length() != 1 {
				t.Errorf("field %s has no label", in.AttrOr("name", "?"))
			}
		})
	})
	// The print view: no navigation, the cautions first and boxed, every
	// active line with room for what was found.
	doc = v.page(fmt.Sprintf("/work-orders/%d/print", id))
	if doc.Find("nav, header.top, form").Length() != 0 {
		t.Error("the print view carries navigation or forms")
	}
	if !strings.Contains(doc.Find(`link[rel="stylesheet"]`).AttrOr("href", ""), "print.css") {
		t.Error("the print view does not use the print style sheet")
	}
	safety := doc.Find("main section.safety")
	if safety.Length() != 1 || doc.Find("main section").First().Is(".safety") != true {
		t.Error("the print view does not open with the safety section")
	}
	if text(safety.Find(".caution-text")) != health.SafetyCaution || safety.Find("ul.checks-print li").Length() != len(safetyChecks) {
		t.Errorf("print cautions: %q", text(safety))
	}
	active := 0
	for _, l := range o.Lines {
		if l.State == store.LineActive {
			active++
		}
	}
	if doc.Find("article.sheet-line").Length() != active || doc.Find("article.sheet-line .write-in").Length() != active {
		t.Errorf("%d lines printed, %d active", doc.Find("article.sheet-line").Length(), active)
	}
	for _, p := range []string{"/work-orders/999999", "/work-orders/999999/print", "/work-orders/x"} {
		if res, _ := v.get(p); res.StatusCode != http.StatusNotFound {
			t.Errorf("%s: %d", p, res.StatusCode)
		}
	}
	// The drive page lists its open lines linked to the order, and the
	// finding page the lines it caused.
	doc = v.page(fmt.Sprintf("/drives/%d", r.DriveID))
	link := doc.Find(fmt.Sprintf(`#work table.work a[href="/work-orders/%d"]`, id))
	if link.Length() == 0 || doc.Find(`nav.onpage a[href="#work"]`).Length() != 1 {
		t.Errorf("the riskiest drive's page does not link order %d", id)
	}
	for _, l := range o.Lines {
		if l.DriveID == r.DriveID && l.FindingID != nil {
			doc = v.page(fmt.Sprintf("/findings/%d", *l.FindingID))
			if doc.Find(fmt.Sprintf(`table.work a[href="/work-orders/%d"]`, id)).Length() != 1 {
				t.Errorf("finding %d's page does not link order %d", *l.FindingID, id)
			}
		}
	}
}

// testWorkOrderActions approves, schedules, cancels and completes orders
// through the forms, and checks the refusals. It leaves the riskiest
// drive's order and the capacitor replacement to the newcomer and browser
// tests.
func testWorkOrderActions(t *testing.T, f *fleet) {
	ctx := context.Background()
	r, _ := riskiestOrder(t, f)
	avoid := append(capacitorDriveIDs(t, f), r.DriveID)
	cleaning := orderWith(t, f, store.OrderProposed, hasTask(store.TaskCleanFilters), avoid...)
	path := fmt.Sprintf("/work-orders/%d", cleaning.ID)
	viewer := f.signedIn(t, f.viewer)
	if res, doc := viewer.post(path+"/approve", url.Values{"csrf": {viewer.csrf}}); res.StatusCode != http.StatusForbidden ||
		!strings.Contains(text(doc.Find("main")), "planner role") {
		t.Errorf("viewer approving: %d", res.StatusCode)
	}
	p := f.signedIn(t, f.planner)
	if res, _ := p.post(path+"/approve", url.Values{"csrf": {"forged"}}); res.StatusCode != http.StatusForbidden {
		t.Errorf("approving with a forged form token: %d", res.StatusCode)
	}
	if o, _ := f.st.GetWorkOrder(ctx, cleaning.ID); o.Status != store.OrderProposed {
		t.Fatalf("a refused post moved the order to %s", o.Status)
	}
	// Completing a proposed order is refused with the reason, as is
	// scheduling it.
	res, doc := p.post(path+"/complete", url.Values{"csrf": {p.csrf}, "done_on": {"2026-11-30"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(text(doc.Find("p.error")), "cannot become done") {
		t.Errorf("completing a proposed order: %d %q", res.StatusCode, text(doc.Find("p.error")))
	}
	res, _ = p.post(path+"/approve", url.Values{"csrf": {p.csrf}, "reason": {"in the winter round"}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != path+"?done=approved" {
		t.Fatalf("approve: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	o, err := f.st.GetWorkOrder(ctx, cleaning.ID)
	if err != nil || o.Status != store.OrderApproved || !strings.HasPrefix(o.ApprovedBy, "token:") || o.StatusReason != "in the winter round" {
		t.Fatalf("approved order %+v, %v", o, err)
	}
	doc = p.page(path + "?done=approved")
	if !strings.Contains(text(doc.Find("p.notice")), "approved") || doc.Find(`form[action$="/schedule"]`).Length() != 1 ||
		doc.Find(`form[action$="/approve"]`).Length() != 0 || doc.Find("#complete form.complete").Length() != 1 {
		t.Error("after approving, the page does not offer scheduling and completion")
	}
	if res, doc := p.post(path+"/schedule", url.Values{"csrf": {p.csrf}, "scheduled_for": {"next week"}}); res.StatusCode != http.StatusUnprocessableEntity ||
		!strings.Contains(text(doc.Find("p.error")), "scheduled for") {
		t.Errorf("schedule with a bad date: %d %q", res.StatusCode, text(doc.Find("p.error")))
	}
	if res, _ := p.post(path+"/schedule", url.Values{"csrf": {p.csrf}, "scheduled_for": {"2026-12-14"}}); res.StatusCode != http.StatusSeeOther {
		t.Errorf("schedule: %d", res.StatusCode)
	}
	if o, _ := f.st.GetWorkOrder(ctx, cleaning.ID); o.Status != store.OrderScheduled || o.ScheduledFor == nil || o.ScheduledFor.Format(time.DateOnly) != "2026-12-14" {
		t.Errorf("scheduled order %s for %v", o.Status, o.ScheduledFor)
	}
	// A completion with a bad as-found value names the line and keeps what
	// was typed; a good one records each line.
	first := o.Lines[slices.IndexFunc(o.Lines, func(l store.WorkOrderLine) bool { return l.State == store.LineActive })]
	key := strconv.FormatInt(first.ID, 10)
	firstName := fmt.Sprintf("line 1 (%s, drive %s)", strings.ToLower(first.TaskTitle[:1])+first.TaskTitle[1:], first.DriveSerial)
	res, doc = p.post(path+"/complete", url.Values{"csrf": {p.csrf}, "done_on": {"2026-11-30"}, "esr-" + key: {"-4"}, "notes-" + key: {"filters clogged"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(text(doc.Find("p.error")), firstName) ||
		doc.Find("#esr-"+key).AttrOr("value", "") != "-4" || text(doc.Find("#notes-"+key)) != "filters clogged" || doc.Find("details#complete[open]").Length() != 1 {
		t.Errorf("completion with a negative ESR: %d %q", res.StatusCode, text(doc.Find("p.error")))
	}
	res, _ = p.post(path+"/complete", url.Values{"csrf": {p.csrf}, "done_on": {"2026-11-30"}, "action-" + key: {string(store.ActionWorkDone)},
		"mode-" + key: {string(health.FailureFan)}, "cause-" + key: {string(health.CauseContamination)}, "notes-" + key: {"filters clogged, fan seized"}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != path+"?done=completed" {
		t.Fatalf("complete: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	o, _ = f.st.GetWorkOrder(ctx, cleaning.ID)
	if o.Status != store.OrderDone || o.DoneAt == nil || !o.DoneAt.Equal(demoNow) {
		t.Fatalf("completed order %s at %v", o.Status, o.DoneAt)
	}
	for _, l := range o.Lines {
		if l.State == store.LineActive && l.Outcome != "done" {
			t.Errorf("line %d outcome %q", l.ID, l.Outcome)
		}
		if l.ID == first.ID && (l.FoundFailureMode != health.FailureFan || l.CompletionNotes != "filters clogged, fan seized") {
			t.Errorf("first line %+v", l)
		}
	}
	doc = p.page(path + "?done=completed")
	if doc.Find("main form").Length() != 0 || !strings.Contains(text(doc.Find("table.lines")), "failure found: Cooling fan") {
		t.Error("the done order offers forms or hides what was found")
	}
	// The failure found is an event the fleet statistics count.
	events, err := store.List[store.Event](ctx, f.st, store.ListQuery{Limit: 50, Filters: map[string]string{"drive_id": strconv.FormatInt(first.DriveID, 10), "type": string(health.EventFailure)}})
	if err != nil || !slices.ContainsFunc(events.Items, func(e store.Event) bool { return e.At.Equal(demoNow) && e.FailureMode == health.FailureFan }) {
		t.Errorf("no fan failure event at completion: %v", err)
	}

	// Cancelling needs a reason.
	cancel := orderWith(t, f, store.OrderProposed, hasTask(store.TaskUpgradeEnclosure), append(avoid, lineDrives(o)...)...)
	cpath := fmt.Sprintf("/work-orders/%d", cancel.ID)
	if res, _ := p.post(cpath+"/cancel", url.Values{"csrf": {p.csrf}}); res.StatusCode != http.StatusUnprocessableEntity {
		t.Errorf("cancel without a reason: %d", res.StatusCode)
	}
	if res, _ := p.post(cpath+"/cancel", url.Values{"csrf": {p.csrf}, "reason": {"the area is being rebuilt"}}); res.StatusCode != http.StatusSeeOther {
		t.Errorf("cancel: %d", res.StatusCode)
	}
	if o, _ := f.st.GetWorkOrder(ctx, cancel.ID); o.Status != store.OrderCancelled || o.StatusReason != "the area is being rebuilt" {
		t.Errorf("cancelled order %s %q", o.Status, o.StatusReason)
	}

	// A stored drive reformed: its last energising is recorded.
	reform := orderWith(t, f, store.OrderProposed, hasTask(store.TaskReform))
	rpath := fmt.Sprintf("/work-orders/%d", reform.ID)
	p.post(rpath+"/approve", url.Values{"csrf": {p.csrf}})
	if res, _ := p.post(rpath+"/complete", url.Values{"csrf": {p.csrf}, "done_on": {"2026-11-30"}}); res.StatusCode != http.StatusSeeOther {
		t.Fatalf("complete the reform: %d", res.StatusCode)
	}
	d, err := store.Get[store.Drive](ctx, f.st, reform.Lines[0].DriveID)
	if err != nil || d.LastEnergisedAt == nil || !d.LastEnergisedAt.Equal(demoNow) {
		t.Errorf("reformed drive last energised %v, %v", d.LastEnergisedAt, err)
	}
}

// squeeze writes s as text() reads a page: runs of white space (the thin
// and no-break spaces of numbers too) as one space.
func squeeze(s string) string { return strings.Join(strings.Fields(s), " ") }

func lineDrives(o store.WorkOrder) []int64 {
	var out []int64
	for _, l := range o.Lines {
		out = append(out, l.DriveID)
	}
	return out
}

func testForecast(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	ctx := context.Background()
	want, err := plan.ForecastFor(ctx, f.st, plan.Config{})
	if err != nil {
		t.Fatal(err)
	}
	doc := c.page("/forecast")
	if text(doc.Find(`nav[aria-label="Main"] a[aria-current="page"]`)) != "Forecast" {
		t.Error("the forecast is not marked in the navigation")
	}
	if doc.Find(`#horizon option[selected]`).AttrOr("value", "") != "24" || doc.Find(`label[for="horizon"]`).Length() != 1 {
		t.Error("the horizon does not default to 24 months, or has no label")
	}
	// The chart: one bar slot per month, parts per site, an image named by
	// its heading and summary, its values as a table of months.
	fig := doc.Find("figure#chart-budget")
	svg := fig.Find("svg.plot")
	if svg.AttrOr("role", "") != "img" || svg.AttrOr("aria-labelledby", "") != "chart-budget-t chart-budget-s" {
		t.Errorf("budget chart svg: %d, role %q", svg.Length(), svg.AttrOr("role", ""))
	}
	segs := 0
	for _, b := range want.Budget {
		if b.TotalCost > 0 {
			segs++
		}
	}
	if svg.Find("rect.seg").Length() != segs {
		t.Errorf("%d bar parts drawn, %d month and site budget rows", svg.Find("rect.seg").Length(), segs)
	}
	if fig.Find("details.values tbody tr").Length() != len(want.Months) || fig.Find("#chart-budget-s p").Length() < 2 {
		t.Error("the budget chart has no text alternative")
	}
	if !strings.Contains(text(fig.Find("#chart-budget-s")), "Expected cost over the 24 months: "+money(want.Totals.Expected.TotalCost)) {
		t.Errorf("summary %q", text(fig.Find("#chart-budget-s")))
	}
	// The budget table itself and the totals.
	if doc.Find("table.budget tbody tr").Length() != len(want.Budget) {
		t.Errorf("%d budget rows, want %d", doc.Find("table.budget tbody tr").Length(), len(want.Budget))
	}
	if got := text(doc.Find("table.totals tbody tr").First().Find("td").Last()); got != money(want.Totals.Expected.TotalCost) {
		t.Errorf("expected total %q, want %s", got, money(want.Totals.Expected.TotalCost))
	}
	// Items with their dates, bands and the replace-or-refurbish decision.
	items := doc.Find("table.items tbody tr")
	if items.Length() != len(want.Items) || items.Length() == 0 {
		t.Fatalf("%d items shown, %d forecast", items.Length(), len(want.Items))
	}
	items.Each(func(i int, r *goquery.Selection) {
		it := want.Items[i]
		if !strings.HasPrefix(text(r.Find("th")), date(it.EndOfLife)) || !strings.HasPrefix(text(r.Find("td").Eq(0)), date(it.EndOfLifeEarliest)+" to ") {
			t.Errorf("item %d dates %q / %q", i+1, text(r.Find("th")), text(r.Find("td").Eq(0)))
		}
		work := text(r.Find("td").Eq(5))
		switch {
		case it.Refurbish != nil && it.Refurbish.Choice == "refurbish":
			if !strings.HasPrefix(work, "Refurbish:") || !strings.Contains(work, it.Refurbish.Reason) {
				t.Errorf("item %d work %q", i+1, work)
			}
		case it.Refurbish != nil:
			if !strings.HasPrefix(work, "Replace the drive") {
				t.Errorf("item %d work %q", i+1, work)
			}
		}
	})
	if doc.Find("main > .caution").Length() != 1 {
		t.Error("the forecast proposes replacements without the caution")
	}
	// A longer horizon holds more.
	long := c.page("/forecast?horizon=120")
	w120, err := plan.ForecastFor(ctx, f.st, plan.Config{HorizonMonths: 120})
	if err != nil {
		t.Fatal(err)
	}
	if long.Find("table.items tbody tr").Length() != min(len(w120.Items), forecastItemsShown) || len(w120.Items) <= len(want.Items) ||
		long.Find(`#horizon option[selected]`).AttrOr("value", "") != "120" {
		t.Errorf("120 months: %d items shown, %d forecast", long.Find("table.items tbody tr").Length(), len(w120.Items))
	}
	refurbish, replace := 0, 0
	long.Find("table.items tbody tr td:nth-child(7)").Each(func(_ int, s *goquery.Selection) {
		switch {
		case strings.HasPrefix(text(s), "Refurbish"):
			refurbish++
		case strings.HasPrefix(text(s), "Replace the drive"):
			replace++
		}
	})
	if refurbish == 0 {
		t.Error("no capacitor refurbishment shown over 120 months")
	}
	if odd := c.page("/forecast?horizon=18"); odd.Find(`#horizon option[value="18"][selected]`).Length() != 1 {
		t.Error("a horizon outside the choices is not shown as chosen")
	}
	for _, bad := range []string{"0", "121", "two"} {
		if res, _ := c.get("/forecast?horizon=" + bad); res.StatusCode != http.StatusBadRequest {
			t.Errorf("horizon %s: %d", bad, res.StatusCode)
		}
	}
}

func testReliability(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	rel, err := plan.ReliabilityFor(context.Background(), f.st, plan.Config{})
	if err != nil {
		t.Fatal(err)
	}
	doc := c.page("/reliability")
	if text(doc.Find(`nav[aria-label="Main"] a[aria-current="page"]`)) != "Reliability" {
		t.Error("reliability is not marked in the navigation")
	}
	if doc.Find(`#r-dim option[selected]`).AttrOr("value", "") != plan.DimensionModel || doc.Find(`#r-mode option[selected]`).AttrOr("value", "") != "dc_bus_capacitors" {
		t.Error("the page does not start at capacitor fits by model")
	}
	var groups []plan.GroupFit
	for _, g := range rel.Groups {
		if g.Dimension == plan.DimensionModel && g.Mode == "dc_bus_capacitors" {
			groups = append(groups, g)
		}
	}
	rows := doc.Find("table.fits tbody tr")
	if rows.Length() != len(groups) {
		t.Fatalf("%d fit rows, %d groups", rows.Length(), len(groups))
	}
	fitted, withPoints, points := 0, 0, 0
	rows.Each(func(i int, r *goquery.Selection) {
		g := groups[i]
		if text(r.Find("th")) != g.Group {
			t.Errorf("row %d is %q, want %s", i+1, text(r.Find("th")), g.Group)
		}
		if g.Fit != nil {
			fitted++
			cells := r.Find("td")
			if text(cells.Eq(3).Find("small")) != trimNum(g.Fit.ShapeBounds.Lower, 2)+" to "+trimNum(g.Fit.ShapeBounds.Upper, 2) ||
				text(cells.Eq(5).Find("strong")) != squeeze(hoursShort(g.Fit.B10H)) ||
				text(cells.Eq(5).Find("small")) != squeeze(hoursShort(g.Fit.B10Bounds.Lower)+" to "+hoursShort(g.Fit.B10Bounds.Upper)) {
				t.Errorf("%s: shape %q, B10 %q", g.Group, text(cells.Eq(3)), text(cells.Eq(5)))
			}
		} else if !strings.HasPrefix(text(r.Find("td.too-few")), "Too few failures for a fit") {
			t.Errorf("%s has no fit and does not say so: %q", g.Group, text(r))
		}
		if len(g.Plot) > 0 {
			withPoints++
			points += len(g.Plot)
		}
	})
	if fitted == 0 || fitted == len(groups) {
		t.Errorf("%d of %d groups fitted: the demo has both fits and groups with too few failures", fitted, len(groups))
	}
	// The plot: a marker path per group with failures, a line per fit,
	// points and fits as a table and in sentences.
	fig := doc.Find("figure#chart-weibull")
	svg := fig.Find("svg.plot")
	if svg.AttrOr("role", "") != "img" || svg.Find("path.mk").Length() != withPoints || svg.Find("line.fit").Length() != fitted {
		t.Errorf("plot: role %q, %d marker groups (want %d), %d lines (want %d)", svg.AttrOr("role", ""),
			svg.Find("path.mk").Length(), withPoints, svg.Find("line.fit").Length(), fitted)
	}
	if strings.Count(svg.Find("path.mk").First().AttrOr("d", ""), "M") != len(groups[slices.IndexFunc(groups, func(g plan.GroupFit) bool { return len(g.Plot) > 0 })].Plot) {
		t.Error("the first group's markers do not match its points")
	}
	if fig.Find("details.values tbody tr").Length() != points || fig.Find("#chart-weibull-s p").Length() < withPoints {
		t.Errorf("text alternative: %d point rows (want %d)", fig.Find("details.values tbody tr").Length(), points)
	}
	labels := text(svg.Find("g.grid"))
	if !strings.Contains(labels, "63.2 %") || !strings.Contains(labels, "10 000") {
		t.Errorf("axis labels %q lack the 63.2 %% line or round hours", labels)
	}
	// Spares per model at both service levels, with shortfalls.
	spares := doc.Find("table.spares tbody tr")
	if spares.Length() != len(rel.Spares) {
		t.Errorf("%d spares rows, want %d", spares.Length(), len(rel.Spares))
	}
	head := text(doc.Find("table.spares thead"))
	for _, h := range []string{"Hold at 90 %", "Shortfall at 90 %", "Hold at 95 %", "Shortfall at 95 %"} {
		if !strings.Contains(head, h) {
			t.Errorf("spares table lacks %q", h)
		}
	}
	short := doc.Find("table.spares tbody tr.short")
	wantShort := 0
	for _, s := range rel.Spares {
		if s.Shortfall > 0 {
			wantShort++
		}
	}
	if short.Length() != wantShort || wantShort == 0 {
		t.Errorf("%d models marked short, want %d", short.Length(), wantShort)
	}
	// The backtest.
	if text(doc.Find("#backtest p strong")) != rel.Backtest.Reading || doc.Find("table.backtest tbody tr").Length() != len(rel.Backtest.Failures) {
		t.Error("the backtest is not shown")
	}
	// Another grouping and mode, and the refusals.
	doc = c.page("/reliability?dimension=fleet&mode=any")
	if doc.Find("table.fits tbody tr").Length() != 1 || doc.Find("figure#chart-weibull svg.plot line.fit").Length() != 1 {
		t.Error("the fleet's any-mode fit is not one row with one line")
	}
	for _, bad := range []string{"dimension=site", "mode=melted"} {
		if res, _ := c.get("/reliability?" + bad); res.StatusCode != http.StatusBadRequest {
			t.Errorf("%s: %d", bad, res.StatusCode)
		}
	}
}

// testPlanningSiteLimit: a token limited to a site sees that site's work
// orders only, and other orders answer 404.
func testPlanningSiteLimit(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.limited)
	doc := c.page("/work-orders?status=all")
	doc.Find("table.orders tbody tr").Each(func(i int, r *goquery.Selection) {
		if !strings.Contains(text(r.Find("td").Eq(0)), f.limitedSite.Name) {
			t.Errorf("limited token sees order row %d at %s", i+1, text(r.Find("td").Eq(0)))
		}
	})
	for _, o := range openOrders(t, f) {
		if o.SiteID != f.limitedSite.ID {
			for _, p := range []string{fmt.Sprintf("/work-orders/%d", o.ID), fmt.Sprintf("/work-orders/%d/print", o.ID)} {
				if res, _ := c.get(p); res.StatusCode != http.StatusNotFound {
					t.Errorf("limited token: %s answers %d", p, res.StatusCode)
				}
			}
			break
		}
	}
	doc = c.page("/forecast?horizon=120")
	doc.Find("table.items tbody tr").Each(func(i int, r *goquery.Selection) {
		if !strings.Contains(text(r.Find("td").Eq(2)), f.limitedSite.Name) {
			t.Errorf("limited token sees forecast item %d: %s", i+1, text(r.Find("td").Eq(2)))
		}
	})
	c.page("/reliability")
}
