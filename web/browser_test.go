package web

import (
	"context"
	"encoding/json"
	"fmt"
	"strings"
	"testing"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"

	"kelvard/web/browsertest"
)

// browserTests drive headless Chromium through the pages of the demo
// fleet: sign in, open every page (each checked with axe-core and
// screenshotted), filter the fleet, acknowledge a finding, choose imperial
// units, and walk a page by Tab alone; no console error anywhere.
func browserTests(t *testing.T, f *fleet) {
	b := browsertest.New(t, f.srv.URL, "pages")
	ctx := context.Background()

	// Signing in: the fleet sends a stranger to the sign-in form, which
	// brings them back after.
	b.Open("/fleet")
	if loc := b.Location(); !strings.HasPrefix(loc, "/signin") {
		t.Fatalf("an unsigned visitor is at %s, want the sign-in form", loc)
	}
	b.Check("01-signin")
	b.Do("sign in", chromedp.SendKeys(chromedp.CSS("#token"), f.planner), chromedp.Submit(chromedp.CSS("#token")),
		chromedp.WaitVisible(chromedp.CSS("table.fleet")))
	if loc := b.Location(); loc != "/fleet" {
		t.Fatalf("after signing in the browser is at %s, want /fleet", loc)
	}
	b.Check("02-fleet")

	// Filtering the fleet by band with the form.
	b.Do("filter", chromedp.Evaluate[chromedp.Void](`document.querySelector("#f-band").value = "urgent"`),
		chromedp.Click(chromedp.CSS(`form.filters button[type="submit"]`)),
		chromedp.WaitReady(chromedp.CSS(`#f-band option[value="urgent"][selected]`)))
	if loc := b.Location(); !strings.Contains(loc, "band=urgent") {
		t.Errorf("filter form led to %s", loc)
	}
	var bands []string
	if err := json.Unmarshal(b.Eval("bands", `[...document.querySelectorAll("table.fleet tbody .band")].map(e => e.textContent.trim())`), &bands); err != nil {
		t.Fatal(err)
	}
	if len(bands) == 0 {
		t.Error("no urgent drive in the demo fleet")
	}
	for _, s := range bands {
		if s != "Urgent" {
			t.Errorf("filtered fleet lists a %s drive", s)
		}
	}
	b.Check("03-fleet-urgent")

	// Every page, reached by following links as a person would.
	b.Open("/fleet")
	driveHref := b.Attr("table.fleet tbody tr:first-child td:nth-child(3) a", "href")
	positionHref := b.Attr("table.fleet tbody tr:first-child th a", "href")
	b.Open(driveHref)
	b.Check("04-drive")
	b.Open(driveHref + "?range=365d")
	b.Check("05-drive-365d")
	b.Open(positionHref)
	b.Check("06-position")
	b.Open("/sites")
	b.Check("07-sites")
	b.Open(b.Attr(".site-card h2 a", "href"))
	b.Check("08-site")
	b.Open("/findings")
	b.Check("09-findings")
	findingHref := b.Attr("article.finding h2 a", "href")
	b.Open(findingHref)
	b.Check("10-finding")
	b.Open("/settings")
	b.Check("11-settings")

	// Acknowledging a finding from its page.
	b.Open(findingHref)
	b.Do("acknowledge", chromedp.SendKeys(chromedp.CSS(`form[action$="/acknowledge"] input[name="reason"]`), "seen on the walk-round"),
		chromedp.Click(chromedp.CSS(`form[action$="/acknowledge"] button`)), browsertest.Redirected("acknowledged"))
	if notice := b.Text("p.notice"); !strings.Contains(notice, "acknowledged") {
		t.Errorf("notice after acknowledging: %q", notice)
	}
	var id int64
	fmt.Sscanf(findingHref, "/findings/%d", &id)
	got, err := f.st.GetFinding(ctx, id)
	if err != nil || got.Status != "acknowledged" || got.StatusReason != "seen on the walk-round" {
		t.Errorf("finding after acknowledging in the browser: %+v, %v", got, err)
	}
	b.Check("12-finding-acknowledged")

	// Imperial units, chosen on the settings page.
	b.Open("/settings")
	b.Do("imperial", chromedp.Click(chromedp.CSS("#units-imperial")), chromedp.Click(chromedp.CSS(`form.settings button`)),
		browsertest.Redirected("units"))
	b.Open(driveHref)
	if body := b.Text("main"); !strings.Contains(body, "°F") || !strings.Contains(body, " hp") {
		t.Error("imperial units chosen but the drive page shows no °F or hp")
	}
	b.Check("13-drive-imperial")

	// A tablet held upright in the plant: the fleet and a drive still read
	// without the page scrolling sideways (wide tables scroll in their own
	// focusable region).
	_, order := riskiestOrder(t, f)
	orderHref := fmt.Sprintf("/work-orders/%d", order)
	b.Do("tablet", chromedp.EmulateViewport(800, 1280, chromedp.EmulateTouch))
	for _, p := range []struct{ name, path string }{{"14-tablet-fleet", "/fleet"}, {"15-tablet-drive", driveHref},
		{"16-tablet-work-order", orderHref}, {"17-tablet-forecast", "/forecast"}, {"18-tablet-reliability", "/reliability"}} {
		b.Open(p.path)
		if over := browsertest.Value(b, "overflow", chromedp.Evaluate[int](`document.documentElement.scrollWidth - document.documentElement.clientWidth`)); over > 0 {
			t.Errorf("%s: the page is %d px wider than an 800 px tablet", p.path, over)
		}
		b.Check(p.name)
	}
	b.Do("desktop", chromedp.ResetViewport())

	planningBrowser(t, f, b, orderHref)

	t.Run("tab walk", func(t *testing.T) { tabWalk(t, b, driveHref) })
}

// tabWalk walks the drive page by Tab alone: the first stop is the skip
// link, Enter on it moves focus into the main content, and every stop
// after is a visible element with a visible focus ring, until every
// tabbable element of the content has been reached.
func tabWalk(t *testing.T, b *browsertest.Browser, path string) {
	b.T = t
	b.Open(path)
	first := b.Tab()
	if first.Tag != "a" || first.Href != "#main" || !first.Visible {
		t.Fatalf("first Tab stop is %+v, want the visible skip link", first)
	}
	b.Do("skip", chromedp.KeyEvent(kb.Enter))
	if active := browsertest.Value(b, "after skip", chromedp.Evaluate[string](`document.activeElement.id`)); active != "main" {
		t.Errorf("Enter on the skip link focused %q, want main", active)
	}
	inMain := browsertest.Value(b, "count in main", chromedp.Evaluate[int](`[...document.querySelectorAll("main a[href], main button, main input:not([type=hidden]), main select, main summary, main [tabindex='0'], footer a[href]")]
		.filter(e => e.checkVisibility({contentVisibilityAuto: true, visibilityProperty: true})).length`))
	stops := 0
	for i := 0; i < inMain+10; i++ {
		f := b.Tab()
		if f.Tag == "body" || (f.Tag == "a" && f.Href == "#main") {
			break
		}
		stops++
		if !f.Visible {
			t.Errorf("Tab stop %d (%s %q) is not visible", i+1, f.Tag, f.Text)
		}
		if !f.Outline {
			t.Errorf("Tab stop %d (%s %q) shows no focus ring", i+1, f.Tag, f.Text)
		}
	}
	if stops != inMain {
		t.Errorf("Tab reached %d stops after the skip link, want the %d tabbable elements of the content", stops, inMain)
	}
	t.Logf("Tab walk of %s: %d stops", path, stops)
	b.NoConsoleErrors("tab walk")
}
