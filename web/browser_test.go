package web

import (
	"context"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"
)

// requireTool finds a command the test needs; CI sets
// KELVARD_TEST_REQUIRE_TOOLS so a missing tool fails there.
func requireTool(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("KELVARD_TEST_REQUIRE_TOOLS") != "" {
			t.Fatalf("%s is required (KELVARD_TEST_REQUIRE_TOOLS is set) but not installed", name)
		}
		t.Skipf("%s is not installed; .ci/run installs it (apt-get install chromium)", name)
	}
	return p
}

// repoRoot is the folder holding go.mod.
func repoRoot(t *testing.T) string {
	t.Helper()
	dir, err := os.Getwd()
	if err != nil {
		t.Fatal(err)
	}
	for {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err == nil {
			return dir
		}
		parent := filepath.Dir(dir)
		if parent == dir {
			t.Fatal("go.mod not found above the test")
		}
		dir = parent
	}
}

// requireAxe reads axe-core's axe.min.js, which .ci/run installs with
// `npm install --prefix .cache/npm axe-core@4`; KELVARD_AXE_JS may name
// another copy.
func requireAxe(t *testing.T) string {
	t.Helper()
	p := os.Getenv("KELVARD_AXE_JS")
	if p == "" {
		p = filepath.Join(repoRoot(t), ".cache", "npm", "node_modules", "axe-core", "axe.min.js")
	}
	b, err := os.ReadFile(p)
	if err != nil {
		if os.Getenv("KELVARD_TEST_REQUIRE_TOOLS") != "" {
			t.Fatalf("axe-core is required (KELVARD_TEST_REQUIRE_TOOLS is set) but %s cannot be read: %v", p, err)
		}
		t.Skipf("axe-core is not installed at %s; .ci/run installs it with npm", p)
	}
	return string(b)
}

// browser drives a headless Chromium against the fleet's server.
type browser struct {
	t      *testing.T
	ctx    context.Context
	base   string
	axe    string
	shots  string
	mu     sync.Mutex
	errors []string
}

// newBrowser starts Chromium with the flags the project's CI uses and a
// fresh profile folder, and collects every console error, uncaught
// exception and browser-log error.
func newBrowser(t *testing.T, f *fleet) *browser {
	exe := requireTool(t, "chromium")
	axe := requireAxe(t)
	shots := filepath.Join(repoRoot(t), "test-output", "pages")
	if err := os.MkdirAll(shots, 0o755); err != nil {
		t.Fatal(err)
	}
	opts := []chromedp.ExecAllocatorOption{
		chromedp.ExecPath(exe),
		chromedp.Flag("headless", true),
		chromedp.NoSandbox,
		chromedp.DisableGPU,
		chromedp.Flag("disable-dev-shm-usage", true),
		chromedp.Flag("disable-background-networking", true),
		chromedp.Flag("disable-component-update", true),
		chromedp.Flag("disable-sync", true),
		chromedp.NoFirstRun,
		chromedp.UserDataDir(t.TempDir()),
		chromedp.WindowSize(1280, 900),
	}
	actx, cancelAlloc := chromedp.NewExecAllocator(context.Background(), opts...)
	ctx, cancelCtx := chromedp.NewContext(actx)
	t.Cleanup(func() { cancelCtx(); cancelAlloc() })
	b := &browser{t: t, ctx: ctx, base: f.srv.URL, axe: axe, shots: shots}
	if err := chromedp.Do(ctx); err != nil {
		t.Fatalf("start chromium: %v", err)
	}
	messages := chromedp.Console(ctx)
	go func() {
		for m, err := range messages {
			if err != nil {
				return
			}
			if m.Type == chromedp.ConsoleError || m.IsException() {
				b.mu.Lock()
				b.errors = append(b.errors, m.String()+" "+m.URL)
				b.mu.Unlock()
			}
		}
	}()
	return b
}

// do runs steps and fails the test on error; each call has a minute.
func (b *browser) do(what string, steps ...chromedp.Action[chromedp.Void]) {
	b.t.Helper()
	ctx, cancel := context.WithTimeout(b.ctx, time.Minute)
	defer cancel()
	if err := chromedp.Do(ctx, steps...); err != nil {
		b.t.Fatalf("%s: %v", what, err)
	}
}

// value runs one action that gives a value.
func value[T any](b *browser, what string, a chromedp.Action[T]) T {
	b.t.Helper()
	ctx, cancel := context.WithTimeout(b.ctx, time.Minute)
	defer cancel()
	v, err := chromedp.Run(ctx, a)
	if err != nil {
		b.t.Fatalf("%s: %v", what, err)
	}
	return v
}

func (b *browser) eval(what, js string, opts ...chromedp.EvaluateOption) []byte {
	b.t.Helper()
	return value(b, what, chromedp.Evaluate[[]byte](js, opts...))
}

// check takes a full-page screenshot, runs axe-core on the page and fails
// on serious or critical violations, and fails on any console error so
// far.
func (b *browser) check(name string) {
	b.t.Helper()
	shot := value(b, "screenshot "+name, chromedp.FullScreenshot(100))
	if err := os.WriteFile(filepath.Join(b.shots, name+".png"), shot, 0o644); err != nil {
		b.t.Fatal(err)
	}
	b.do("inject axe", chromedp.Evaluate[chromedp.Void](b.axe))
	raw := value(b, "axe "+name, chromedp.Evaluate[string](`axe.run(document, {resultTypes: ["violations"]}).then(r => JSON.stringify(r.violations))`,
		chromedp.EvalAwaitPromise))
	var violations []struct {
		ID     string `json:"id"`
		Impact string `json:"impact"`
		Help   string `json:"help"`
		Nodes  []struct {
			Target []any `json:"target"`
		} `json:"nodes"`
	}
	if err := json.Unmarshal([]byte(raw), &violations); err != nil {
		b.t.Fatalf("axe answer on %s: %v", name, err)
	}
	for _, v := range violations {
		var where []string
		for i, n := range v.Nodes {
			if i == 5 {
				where = append(where, "…")
				break
			}
			where = append(where, fmt.Sprint(n.Target...))
		}
		if v.Impact == "serious" || v.Impact == "critical" {
			b.t.Errorf("%s: axe %s (%s): %s at %s", name, v.ID, v.Impact, v.Help, strings.Join(where, ", "))
		} else {
			b.t.Logf("%s: axe %s (%s): %s at %s", name, v.ID, v.Impact, v.Help, strings.Join(where, ", "))
		}
	}
	b.noConsoleErrors(name)
}

func (b *browser) noConsoleErrors(where string) {
	b.t.Helper()
	time.Sleep(100 * time.Millisecond) // let late messages arrive
	b.mu.Lock()
	defer b.mu.Unlock()
	for _, e := range b.errors {
		b.t.Errorf("%s: %s", where, e)
	}
	b.errors = nil
}

// open navigates to a path and waits for the main landmark.
func (b *browser) open(path string) {
	b.t.Helper()
	b.do("open "+path, chromedp.Navigate(b.base+path), chromedp.WaitReady(chromedp.CSS("main")))
}

func (b *browser) location() string {
	b.t.Helper()
	return strings.TrimPrefix(value(b, "location", chromedp.Location()), b.base)
}

func (b *browser) attr(sel, name string) string {
	b.t.Helper()
	r := value(b, "attribute "+name+" of "+sel, chromedp.AttributeValue(chromedp.CSS(sel), name))
	return r.Value
}

func (b *browser) text(sel string) string {
	b.t.Helper()
	return value(b, "text of "+sel, chromedp.Text(chromedp.CSS(sel)))
}

// focused describes the element that has focus.
type focused struct {
	Tag, Text, ID, Href string
	Visible, Outline    bool
}

// tab presses Tab and returns the element that then has focus.
func (b *browser) tab() focused {
	b.t.Helper()
	b.do("tab", chromedp.KeyEvent(kb.Tab))
	return value(b, "focus", chromedp.Evaluate[focused](`(() => {
		const e = document.activeElement;
		const r = e.getBoundingClientRect();
		const s = getComputedStyle(e);
		return {Tag: e.tagName.toLowerCase(), Text: (e.innerText || e.value || "").trim().slice(0, 60), ID: e.id || "",
			Href: e.getAttribute("href") || "", Visible: r.width > 0 && r.height > 0,
			Outline: s.outlineStyle !== "none" && parseFloat(s.outlineWidth) >= 2};
	})()`))
}

// browserTests drive headless Chromium through the pages of the demo
// fleet: sign in, open every page (each checked with axe-core and
// screenshotted), filter the fleet, acknowledge a finding, choose imperial
// units, and walk a page by Tab alone; no console error anywhere.
func browserTests(t *testing.T, f *fleet) {
	b := newBrowser(t, f)
	ctx := context.Background()

	// Signing in: the fleet sends a stranger to the sign-in form, which
	// brings them back after.
	b.open("/fleet")
	if loc := b.location(); !strings.HasPrefix(loc, "/signin") {
		t.Fatalf("an unsigned visitor is at %s, want the sign-in form", loc)
	}
	b.check("01-signin")
	b.do("sign in", chromedp.SendKeys(chromedp.CSS("#token"), f.planner), chromedp.Submit(chromedp.CSS("#token")),
		chromedp.WaitVisible(chromedp.CSS("table.fleet")))
	if loc := b.location(); loc != "/fleet" {
		t.Fatalf("after signing in the browser is at %s, want /fleet", loc)
	}
	b.check("02-fleet")

	// Filtering the fleet by band with the form.
	b.do("filter", chromedp.Evaluate[chromedp.Void](`document.querySelector("#f-band").value = "urgent"`),
		chromedp.Click(chromedp.CSS(`form.filters button[type="submit"]`)),
		chromedp.WaitReady(chromedp.CSS(`#f-band option[value="urgent"][selected]`)))
	if loc := b.location(); !strings.Contains(loc, "band=urgent") {
		t.Errorf("filter form led to %s", loc)
	}
	var bands []string
	if err := json.Unmarshal(b.eval("bands", `[...document.querySelectorAll("table.fleet tbody .band")].map(e => e.textContent.trim())`), &bands); err != nil {
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
	b.check("03-fleet-urgent")

	// Every page, reached by following links as a person would.
	b.open("/fleet")
	driveHref := b.attr("table.fleet tbody tr:first-child td:nth-child(3) a", "href")
	positionHref := b.attr("table.fleet tbody tr:first-child th a", "href")
	b.open(driveHref)
	b.check("04-drive")
	b.open(driveHref + "?range=365d")
	b.check("05-drive-365d")
	b.open(positionHref)
	b.check("06-position")
	b.open("/sites")
	b.check("07-sites")
	b.open(b.attr(".site-card h2 a", "href"))
	b.check("08-site")
	b.open("/findings")
	b.check("09-findings")
	findingHref := b.attr("article.finding h2 a", "href")
	b.open(findingHref)
	b.check("10-finding")
	b.open("/settings")
	b.check("11-settings")

	// Acknowledging a finding from its page.
	b.open(findingHref)
	b.do("acknowledge", chromedp.SendKeys(chromedp.CSS(`form[action$="/acknowledge"] input[name="reason"]`), "seen on the walk-round"),
		chromedp.Click(chromedp.CSS(`form[action$="/acknowledge"] button`)), chromedp.WaitVisible(chromedp.CSS("p.notice")))
	if notice := b.text("p.notice"); !strings.Contains(notice, "acknowledged") {
		t.Errorf("notice after acknowledging: %q", notice)
	}
	var id int64
	fmt.Sscanf(findingHref, "/findings/%d", &id)
	got, err := f.st.GetFinding(ctx, id)
	if err != nil || got.Status != "acknowledged" || got.StatusReason != "seen on the walk-round" {
		t.Errorf("finding after acknowledging in the browser: %+v, %v", got, err)
	}
	b.check("12-finding-acknowledged")

	// Imperial units, chosen on the settings page.
	b.open("/settings")
	b.do("imperial", chromedp.Click(chromedp.CSS("#units-imperial")), chromedp.Click(chromedp.CSS(`form.settings button`)),
		chromedp.WaitVisible(chromedp.CSS("p.notice")))
	b.open(driveHref)
	if body := b.text("main"); !strings.Contains(body, "°F") || !strings.Contains(body, " hp") {
		t.Error("imperial units chosen but the drive page shows no °F or hp")
	}
	b.check("13-drive-imperial")

	// A tablet held upright in the plant: the fleet and a drive still read
	// without the page scrolling sideways (wide tables scroll in their own
	// focusable region).
	b.do("tablet", chromedp.EmulateViewport(800, 1280, chromedp.EmulateTouch))
	for _, p := range []struct{ name, path string }{{"14-tablet-fleet", "/fleet"}, {"15-tablet-drive", driveHref}} {
		b.open(p.path)
		if over := value(b, "overflow", chromedp.Evaluate[int](`document.documentElement.scrollWidth - document.documentElement.clientWidth`)); over > 0 {
			t.Errorf("%s: the page is %d px wider than an 800 px tablet", p.path, over)
		}
		b.check(p.name)
	}
	b.do("desktop", chromedp.ResetViewport())

	t.Run("tab walk", func(t *testing.T) { tabWalk(t, b, driveHref) })
}

// tabWalk walks the drive page by Tab alone: the first stop is the skip
// link, Enter on it moves focus into the main content, and every stop
// after is a visible element with a visible focus ring, until every
// tabbable element of the content has been reached.
func tabWalk(t *testing.T, b *browser, path string) {
	b.t = t
	b.open(path)
	first := b.tab()
	if first.Tag != "a" || first.Href != "#main" || !first.Visible {
		t.Fatalf("first Tab stop is %+v, want the visible skip link", first)
	}
	b.do("skip", chromedp.KeyEvent(kb.Enter))
	if active := value(b, "after skip", chromedp.Evaluate[string](`document.activeElement.id`)); active != "main" {
		t.Errorf("Enter on the skip link focused %q, want main", active)
	}
	inMain := value(b, "count in main", chromedp.Evaluate[int](`[...document.querySelectorAll("main a[href], main button, main input:not([type=hidden]), main select, main summary, main [tabindex='0'], footer a[href]")]
		.filter(e => e.checkVisibility({contentVisibilityAuto: true, visibilityProperty: true})).length`))
	stops := 0
	for i := 0; i < inMain+10; i++ {
		f := b.tab()
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
	b.noConsoleErrors("tab walk")
}
