package web

import (
	"context"
	"fmt"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/chromedp/chromedp"

	"kelvard/health"
	"kelvard/jobs"
	"kelvard/store"
	"kelvard/web/browsertest"
)

// planningBrowser opens the work order, forecast and reliability pages
// from the navigation (each checked with axe-core and screenshotted), then
// takes a capacitor replacement through approval, scheduling and
// completion with as-found data, and checks that the capacitors' life
// restarted in the store and on the drive page after the next assessment.
func planningBrowser(t *testing.T, f *fleet, b *browsertest.Browser, orderHref string) {
	ctx := context.Background()
	b.Do("desktop width", chromedp.EmulateViewport(1280, 900))
	b.Open("/fleet")
	b.Do("to the work orders", chromedp.Click(chromedp.CSS(`nav[aria-label="Main"] a[href="/work-orders"]`)),
		chromedp.WaitVisible(chromedp.CSS("table.orders")))
	b.Check("20-work-orders")
	b.Open(orderHref)
	b.Check("21-work-order")
	b.Open(orderHref + "/print")
	b.Check("22-work-order-print")
	b.Open("/fleet")
	b.Do("to the forecast", chromedp.Click(chromedp.CSS(`nav[aria-label="Main"] a[href="/forecast"]`)),
		chromedp.WaitVisible(chromedp.CSS("figure#chart-budget")))
	b.Check("23-forecast")
	b.Do("a longer horizon", chromedp.Evaluate[chromedp.Void](`document.querySelector("#horizon").value = "120"`),
		chromedp.Click(chromedp.CSS(`form.filters button[type="submit"]`)),
		chromedp.WaitReady(chromedp.CSS(`#horizon option[value="120"][selected]`)))
	if rows := browsertest.Value(b, "items", chromedp.Evaluate[int](`document.querySelectorAll("table.items tbody tr").length`)); rows < 10 {
		t.Errorf("120-month forecast lists %d items", rows)
	}
	b.Check("24-forecast-120-months")
	b.Open("/fleet")
	b.Do("to reliability", chromedp.Click(chromedp.CSS(`nav[aria-label="Main"] a[href="/reliability"]`)),
		chromedp.WaitVisible(chromedp.CSS("figure#chart-weibull svg")))
	b.Check("25-reliability")
	b.Do("fleet, any failure", chromedp.Evaluate[chromedp.Void](`document.querySelector("#r-dim").value = "fleet"; document.querySelector("#r-mode").value = "any"`),
		chromedp.Click(chromedp.CSS(`form.filters button[type="submit"]`)),
		chromedp.WaitReady(chromedp.CSS(`#r-mode option[value="any"][selected]`)))
	b.Check("26-reliability-fleet-any")

	// A capacitor replacement, from proposal to done, in the browser.
	o := orderWith(t, f, store.OrderProposed, hasTask(store.TaskReplaceCapacitors))
	var line store.WorkOrderLine
	for _, l := range o.Lines {
		if l.Task == store.TaskReplaceCapacitors && l.State == store.LineActive {
			line = l
		}
	}
	before := fittedCapacitor(t, f, line.DriveID)
	beforeA, err := f.st.LatestAssessment(ctx, line.DriveID)
	if err != nil {
		t.Fatal(err)
	}
	path := fmt.Sprintf("/work-orders/%d", o.ID)
	b.Open(path)
	b.Do("approve", chromedp.Click(chromedp.CSS(`form[action$="/approve"] button`)), browsertest.Redirected("approved"))
	if notice := b.Text("p.notice"); !strings.Contains(notice, "approved") {
		t.Errorf("notice after approving: %q", notice)
	}
	b.Do("schedule", chromedp.Evaluate[chromedp.Void](`document.querySelector("#schedule-on").value = "2026-12-10"`),
		chromedp.Click(chromedp.CSS(`form[action$="/schedule"] button`)), browsertest.Redirected("scheduled"))
	if got, _ := f.st.GetWorkOrder(ctx, o.ID); got.Status != store.OrderScheduled || got.ScheduledFor == nil ||
		got.ScheduledFor.Format(time.DateOnly) != "2026-12-10" {
		t.Fatalf("after scheduling in the browser the order is %s for %v", got.Status, got.ScheduledFor)
	}
	key := strconv.FormatInt(line.ID, 10)
	b.Do("open the completion", chromedp.Click(chromedp.CSS("#complete > summary")), chromedp.WaitVisible(chromedp.CSS("#cap-"+key)))
	if action := b.Attr("#action-"+key+" option[selected]", "value"); action != string(store.ActionReplacedCapacitors) {
		t.Errorf("the capacitor line's action defaults to %q", action)
	}
	b.Check("27-work-order-completion")
	b.Do("record as done", chromedp.SendKeys(chromedp.CSS("#cap-"+key), "3650"), chromedp.SendKeys(chromedp.CSS("#esr-"+key), "41"),
		chromedp.SendKeys(chromedp.CSS("#notes-"+key), "two cans bulging; bank replaced"),
		chromedp.Click(chromedp.CSS(`form.complete button[type="submit"]`)), browsertest.Redirected("completed"))
	if notice := b.Text("p.notice"); !strings.Contains(notice, "recorded as done") {
		t.Fatalf("notice after completing: %q", notice)
	}
	b.Check("28-work-order-done")

	// The store: the order is done, the line records what was found, the
	// old bank is removed and a new one fitted at the completion.
	done, err := f.st.GetWorkOrder(ctx, o.ID)
	if err != nil || done.Status != store.OrderDone {
		t.Fatalf("order after completing: %s %v", done.Status, err)
	}
	for _, l := range done.Lines {
		if l.ID != line.ID {
			continue
		}
		if l.Action != store.ActionReplacedCapacitors || l.FoundCapacitanceUF == nil || *l.FoundCapacitanceUF != 3650 ||
			l.FoundESRMilliohm == nil || *l.FoundESRMilliohm != 41 || l.NewComponentID == nil || l.CompletionNotes != "two cans bulging; bank replaced" {
			t.Errorf("completed line %+v", l)
		}
	}
	after := fittedCapacitor(t, f, line.DriveID)
	if after.ID == before.ID || !after.InstalledAt.Equal(demoNow) {
		t.Errorf("capacitors fitted now: %+v (before %+v)", after, before)
	}
	old, err := store.Get[store.Component](ctx, f.st, before.ID)
	if err != nil || old.RemovedAt == nil || !old.RemovedAt.Equal(demoNow) {
		t.Errorf("the old bank was not removed at the completion: %+v %v", old, err)
	}
	// The next assessment restarts the capacitors' life.
	if _, err := jobs.NewAssessor(f.st, jobs.AssessConfig{Now: f.st.Now}).Assess(ctx, jobs.AssessOptions{}); err != nil {
		t.Fatal(err)
	}
	afterA, err := f.st.LatestAssessment(ctx, line.DriveID)
	if err != nil {
		t.Fatal(err)
	}
	if !(afterA.CapacitorLifeUsedFraction < 0.01) || !(beforeA.CapacitorLifeUsedFraction > afterA.CapacitorLifeUsedFraction) {
		t.Errorf("capacitor life used %.3f before, %.3f after the replacement", beforeA.CapacitorLifeUsedFraction, afterA.CapacitorLifeUsedFraction)
	}
	b.Open(fmt.Sprintf("/drives/%d", line.DriveID))
	life := b.Text("table.life tbody tr:first-child")
	if !strings.HasPrefix(strings.TrimSpace(life), "DC-bus capacitors") || !strings.Contains(life, percent(afterA.CapacitorLifeUsedFraction)) {
		t.Errorf("the drive page's capacitor life after the replacement: %q (want %s)", life, percent(afterA.CapacitorLifeUsedFraction))
	}
	if fitted := b.Text("#ratings"); !strings.Contains(fitted, "Capacitor bank fitted "+date(demoNow)) && !strings.Contains(fitted, "Capacitor bank fitted\n"+date(demoNow)) {
		t.Errorf("the drive page does not show the new bank fitted %s", date(demoNow))
	}
	if n := browsertest.Value(b, "done order link", chromedp.Evaluate[int](fmt.Sprintf(`document.querySelectorAll('#work details a[href="/work-orders/%d"]').length`, o.ID))); n < 1 {
		t.Errorf("the drive page lists the done order %d times under earlier work, want at least once", n)
	}
	b.Check("29-drive-after-replacement")
}

// fittedCapacitor is the drive's capacitor bank fitted now.
func fittedCapacitor(t *testing.T, f *fleet, driveID int64) store.Component {
	t.Helper()
	page, err := store.List[store.Component](context.Background(), f.st, store.ListQuery{Limit: 100,
		Filters: map[string]string{"drive_id": strconv.FormatInt(driveID, 10), "kind": string(health.ComponentCapacitors)}})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range page.Items {
		if c.RemovedAt == nil {
			return c
		}
	}
	t.Fatalf("drive %d has no capacitor bank fitted", driveID)
	return store.Component{}
}
