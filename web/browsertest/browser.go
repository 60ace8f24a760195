// Package browsertest drives a headless Chromium for the page tests: it
// starts the browser with the flags the project's CI uses, opens pages,
// takes screenshots, runs axe-core on each page and fails on serious or
// critical violations, and fails on any console error or uncaught
// exception. Chromium comes from Debian (`chromium`) and axe-core from npm
// (.ci/run installs both); without them a test skips and says why, and
// KELVARD_TEST_REQUIRE_TOOLS=1 makes that a failure.
package browsertest

import (
	"context"
	"encoding/json"
	"fmt"
	"kelvard/store/storetest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/chromedp/chromedp"
	"github.com/chromedp/chromedp/kb"
)

// RepoRoot is the folder holding go.mod.
func RepoRoot(t *testing.T) string {
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

// RequireAxe reads axe-core's axe.min.js, which .ci/run installs with
// `npm install --prefix .cache/npm axe-core@4`; KELVARD_AXE_JS may name
// another copy.
func RequireAxe(t *testing.T) string {
	t.Helper()
	p := os.Getenv("KELVARD_AXE_JS")
	if p == "" {
		p = filepath.Join(RepoRoot(t), ".cache", "npm", "node_modules", "axe-core", "axe.min.js")
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

// Browser drives a headless Chromium against a server.
type Browser struct {
	// T is the test that failures go to; a subtest may take the browser
	// over by setting it.
	T      *testing.T
	Ctx    context.Context
	Base   string
	axe    string
	shots  string
	mu     sync.Mutex
	errors []string
}

// New starts Chromium with the flags the project's CI uses and a fresh
// profile folder, and collects every console error, uncaught exception
// and browser-log error. Screenshots go to test-output/<shots>/.
func New(t *testing.T, base, shots string) *Browser {
	exe := storetest.RequireTool(t, "chromium", "chromium")
	axe := RequireAxe(t)
	dir := filepath.Join(RepoRoot(t), "test-output", shots)
	if err := os.MkdirAll(dir, 0o755); err != nil {
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
	b := &Browser{T: t, Ctx: ctx, Base: base, axe: axe, shots: dir}
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

// Do runs steps and fails the test on error; each call has a minute.
func (b *Browser) Do(what string, steps ...chromedp.Action[chromedp.Void]) {
	b.T.Helper()
	ctx, cancel := context.WithTimeout(b.Ctx, time.Minute)
	defer cancel()
	if err := chromedp.Do(ctx, steps...); err != nil {
		b.T.Fatalf("%s: %v", what, err)
	}
}

// Value runs one action that gives a value.
func Value[T any](b *Browser, what string, a chromedp.Action[T]) T {
	b.T.Helper()
	ctx, cancel := context.WithTimeout(b.Ctx, time.Minute)
	defer cancel()
	v, err := chromedp.Run(ctx, a)
	if err != nil {
		b.T.Fatalf("%s: %v", what, err)
	}
	return v
}

// Eval evaluates a script and returns its JSON value.
func (b *Browser) Eval(what, js string, opts ...chromedp.EvaluateOption) []byte {
	b.T.Helper()
	return Value(b, what, chromedp.Evaluate[[]byte](js, opts...))
}

// Check takes a full-page screenshot, runs axe-core on the page and fails
// on serious or critical violations, and fails on any console error so
// far.
func (b *Browser) Check(name string) {
	b.T.Helper()
	shot := Value(b, "screenshot "+name, chromedp.FullScreenshot(100))
	if err := os.WriteFile(filepath.Join(b.shots, name+".png"), shot, 0o644); err != nil {
		b.T.Fatal(err)
	}
	b.Do("inject axe", chromedp.Evaluate[chromedp.Void](b.axe))
	raw := Value(b, "axe "+name, chromedp.Evaluate[string](`axe.run(document, {resultTypes: ["violations"]}).then(r => JSON.stringify(r.violations))`,
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
		b.T.Fatalf("axe answer on %s: %v", name, err)
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
			b.T.Errorf("%s: axe %s (%s): %s at %s", name, v.ID, v.Impact, v.Help, strings.Join(where, ", "))
		} else {
			b.T.Logf("%s: axe %s (%s): %s at %s", name, v.ID, v.Impact, v.Help, strings.Join(where, ", "))
		}
	}
	b.NoConsoleErrors(name)
}

// NoConsoleErrors fails the test on every console error collected so far.
func (b *Browser) NoConsoleErrors(where string) {
	b.T.Helper()
	time.Sleep(100 * time.Millisecond) // let late messages arrive
	b.mu.Lock()
	defer b.mu.Unlock()
	for _, e := range b.errors {
		b.T.Errorf("%s: %s", where, e)
	}
	b.errors = nil
}

// Open navigates to a path and waits for the main landmark.
func (b *Browser) Open(path string) {
	b.T.Helper()
	b.Do("open "+path, chromedp.Navigate(b.Base+path), chromedp.WaitReady(chromedp.CSS("main")))
}

// Redirected waits until a form's redirect has landed on the page that
// confirms it: the notice for done=what. Waiting for any notice would pass
// at once on a page that still showed the previous one, before the new
// request had finished.
func Redirected(what string) chromedp.Action[chromedp.Void] {
	return chromedp.WaitVisible(chromedp.CSS(fmt.Sprintf(`p.notice[data-done=%q]`, what)))
}

// Location is the path (and query) the browser is at.
func (b *Browser) Location() string {
	b.T.Helper()
	return strings.TrimPrefix(Value(b, "location", chromedp.Location()), b.Base)
}

// Attr is an attribute of the first element matching sel.
func (b *Browser) Attr(sel, name string) string {
	b.T.Helper()
	r := Value(b, "attribute "+name+" of "+sel, chromedp.AttributeValue(chromedp.CSS(sel), name))
	return r.Value
}

// Text is the visible text of the first element matching sel.
func (b *Browser) Text(sel string) string {
	b.T.Helper()
	return Value(b, "text of "+sel, chromedp.Text(chromedp.CSS(sel)))
}

// Focused describes the element that has focus.
type Focused struct {
	Tag, Text, ID, Href string
	Visible, Outline    bool
}

// Tab presses Tab and returns the element that then has focus.
func (b *Browser) Tab() Focused {
	b.T.Helper()
	b.Do("tab", chromedp.KeyEvent(kb.Tab))
	return Value(b, "focus", chromedp.Evaluate[Focused](`(() => {
		const e = document.activeElement;
		const r = e.getBoundingClientRect();
		const s = getComputedStyle(e);
		return {Tag: e.tagName.toLowerCase(), Text: (e.innerText || e.value || "").trim().slice(0, 60), ID: e.id || "",
			Href: e.getAttribute("href") || "", Visible: r.width > 0 && r.height > 0,
			Outline: s.outlineStyle !== "none" && parseFloat(s.outlineWidth) >= 2};
	})()`))
}
