package main

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"log/slog"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/PuerkitoBio/goquery"
	"github.com/chromedp/chromedp"

	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
	"kelvard/web/browsertest"
)

// syncBuffer is a bytes.Buffer safe for the server goroutine and the test.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// started is a running kelvard process (in this test binary).
type started struct {
	base   string
	stdout *syncBuffer
	cancel context.CancelFunc
	done   chan int
	stderr *syncBuffer
}

var addrRE = regexp.MustCompile(`serving on (http://\S+)`)

// startServe runs `kelvard serve` with env and waits until /readyz is 200.
func startServe(t *testing.T, env map[string]string, args ...string) *started {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	out, errOut := &syncBuffer{}, &syncBuffer{}
	s := &started{cancel: cancel, done: make(chan int, 1), stderr: errOut, stdout: out}
	getenv := func(k string) string { return env[k] }
	go func() {
		s.done <- run(ctx, append([]string{"serve", "--listen", "127.0.0.1:0"}, args...), getenv, out, errOut)
	}()
	t.Cleanup(func() { s.stop(t) })
	// --demo loads and assesses the demo fleet before it turns ready.
	deadline := time.Now().Add(3 * time.Minute)
	for time.Now().Before(deadline) {
		if m := addrRE.FindStringSubmatch(out.String()); m != nil {
			s.base = m[1]
			break
		}
		select {
		case code := <-s.done:
			t.Fatalf("serve exited with %d: %s", code, errOut.String())
		case <-time.After(20 * time.Millisecond):
		}
	}
	if s.base == "" {
		t.Fatalf("serve printed no address: %s", errOut.String())
	}
	for time.Now().Before(deadline) {
		resp, err := http.Get(s.base + "/readyz")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				return s
			}
		}
		time.Sleep(50 * time.Millisecond)
	}
	t.Fatalf("/readyz never turned ready: %s", errOut.String())
	return nil
}

// stop sends the equivalent of SIGTERM and waits for a clean exit.
func (s *started) stop(t *testing.T) {
	t.Helper()
	if s.cancel == nil {
		return
	}
	s.cancel()
	s.cancel = nil
	select {
	case code := <-s.done:
		if code != 0 {
			t.Errorf("serve exited with %d: %s", code, s.stderr.String())
		}
	case <-time.After(40 * time.Second):
		t.Error("serve did not stop within 40 s")
	}
}

func call(t *testing.T, method, url, token, body string) (int, []byte) {
	t.Helper()
	var r io.Reader
	if body != "" {
		r = strings.NewReader(body)
	}
	req, _ := http.NewRequest(method, url, r)
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, b
}

// TestServeEndToEnd starts the real program on each store with a bootstrap
// token and uses the API.
func TestServeEndToEnd(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			secret, err := store.NewSecret()
			if err != nil {
				t.Fatal(err)
			}
			env := map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, d), "KELVARD_BOOTSTRAP_TOKEN": secret, "KELVARD_LOG_LEVEL": "warn"}
			srv := startServe(t, env)
			if code, _ := call(t, "GET", srv.base+"/healthz", "", ""); code != 200 {
				t.Errorf("/healthz: %d", code)
			}
			code, body := call(t, "POST", srv.base+"/api/v1/sites", secret, `{"name":"Hill works","ambient_min_c":-10,"ambient_max_c":35}`)
			if code != http.StatusCreated {
				t.Fatalf("create site: %d %s", code, body)
			}
			code, body = call(t, "GET", srv.base+"/api/v1/sites", secret, "")
			var page struct{ Items []store.Site }
			if code != 200 || json.Unmarshal(body, &page) != nil || len(page.Items) != 1 || page.Items[0].Name != "Hill works" {
				t.Errorf("list sites: %d %s", code, body)
			}
			srv.stop(t)
			// A second start on the same store keeps the data and does not
			// make the bootstrap token again.
			srv = startServe(t, env)
			code, body = call(t, "GET", srv.base+"/api/v1/tokens", secret, "")
			var toks []store.Token
			if code != 200 || json.Unmarshal(body, &toks) != nil || len(toks) != 1 {
				t.Errorf("tokens after restart: %d %s", code, body)
			}
		})
	}
}

// TestCommands runs migrate, token and version the way an operator would.
func TestCommands(t *testing.T) {
	t.Parallel()
	url := storetest.URL(t, store.SQLite)
	env := func(k string) string {
		return map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_LOG_LEVEL": "warn"}[k]
	}
	runOK := func(args ...string) string {
		t.Helper()
		var out, errOut bytes.Buffer
		if code := run(context.Background(), args, env, &out, &errOut); code != 0 {
			t.Fatalf("kelvard %v: exit %d: %s", args, code, errOut.String())
		}
		return out.String()
	}
	if !strings.Contains(runOK("migrate"), "migrations applied") {
		t.Error("migrate says nothing")
	}
	secret := strings.TrimSpace(runOK("token", "create", "--role", "planner", "--name", "night shift"))
	if !strings.HasPrefix(secret, "kvd_") {
		t.Fatalf("token create printed %q", secret)
	}
	list := runOK("token", "list")
	if !strings.Contains(list, "night shift") || !strings.Contains(list, "planner") || strings.Contains(list, secret) {
		t.Errorf("token list:\n%s", list)
	}
	if !strings.Contains(runOK("token", "revoke", "1"), "revoked") {
		t.Error("revoke says nothing")
	}
	if !strings.HasPrefix(runOK("version"), "kelvard ") {
		t.Error("version")
	}
	// The online copy holds the tokens made above.
	copyPath := filepath.Join(t.TempDir(), "copy.db")
	if !strings.Contains(runOK("backup", copyPath), copyPath) {
		t.Error("backup does not name its file")
	}
	cp, err := store.Open(context.Background(), "sqlite:"+copyPath, store.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer cp.Close()
	if toks, err := cp.Tokens(context.Background()); err != nil || len(toks) == 0 {
		t.Errorf("tokens in the backup: %v %v", toks, err)
	}
	for _, bad := range [][]string{{}, {"frobnicate"}, {"token"}, {"token", "create", "--role", "boss", "--name", "x"}, {"serve", "--listen"},
		{"backup"}, {"backup", copyPath}} {
		var out, errOut bytes.Buffer
		if code := run(context.Background(), bad, env, &out, &errOut); code == 0 {
			t.Errorf("kelvard %v succeeded", bad)
		}
	}
}

// TestImportCommand imports register files the way an operator would: from
// a file, from standard input, with a bad row, and with --partial after the
// arguments.
func TestImportCommand(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			url := storetest.URL(t, d)
			env := func(k string) string {
				return map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_LOG_LEVEL": "warn"}[k]
			}
			dir := t.TempDir()
			sites := filepath.Join(dir, "sites.csv")
			if err := os.WriteFile(sites, []byte("name,ambient_min_c,ambient_max_c\nHill Works,-2,38\nRiver Intake,4,41\n"), 0o644); err != nil {
				t.Fatal(err)
			}
			imp := func(stdin string, args ...string) (int, string, string) {
				t.Helper()
				var out, errOut bytes.Buffer
				err := cmdImport(context.Background(), args, env, strings.NewReader(stdin), &out, &errOut)
				code := 0
				if err != nil {
					code = 1
					errOut.WriteString(err.Error())
				}
				return code, out.String(), errOut.String()
			}
			code, out, errOut := imp("", "sites", sites)
			if code != 0 || !strings.Contains(out, "sites: 2 rows: 2 created, 0 updated, 0 unchanged, 0 rejected") {
				t.Fatalf("import sites: %d\n%s\n%s", code, out, errOut)
			}
			if !strings.Contains(errOut, "import sites: 2 of 2 rows written (100%)") {
				t.Errorf("no progress lines on a non-terminal:\n%s", errOut)
			}
			areas := "site,name,environment.water\nHill Works,Dosing room,dripping\nHill Works,Pump hall,firehose\n"
			code, out, errOut = imp(areas, "areas", "-")
			if code == 0 || !strings.Contains(out, "areas: nothing written: 1 of 2 rows rejected") ||
				!strings.Contains(out, "line 3: environment.water: must be one of") || !strings.Contains(errOut, "nothing was written") {
				t.Errorf("bad row from stdin: %d\n%s\n%s", code, out, errOut)
			}
			code, out, errOut = imp(areas, "areas", "-", "--partial")
			if code != 0 || !strings.Contains(out, "areas: 2 rows: 1 created, 0 updated, 0 unchanged, 1 rejected") ||
				!strings.Contains(out, "line 3: environment.water") {
				t.Errorf("partial import: %d\n%s\n%s", code, out, errOut)
			}
			code, out, _ = imp("", "sites", sites)
			if code != 0 || !strings.Contains(out, "2 unchanged") {
				t.Errorf("re-import: %d\n%s", code, out)
			}
			st, err := store.Open(context.Background(), url, store.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer st.Close()
			page, err := store.List[store.Area](context.Background(), st, store.ListQuery{})
			if err != nil || len(page.Items) != 1 || page.Items[0].Name != "Dosing room" {
				t.Errorf("areas after the imports: %+v, %v", page.Items, err)
			}
			for _, bad := range [][]string{{}, {"sites"}, {"pumps", sites}, {"sites", sites, "extra"}, {"sites", sites, "--frobnicate"}} {
				var o, e bytes.Buffer
				if code := run(context.Background(), append([]string{"import"}, bad...), env, &o, &e); code != 2 {
					t.Errorf("kelvard import %v: exit %d, want 2 (usage): %s", bad, code, e.String())
				}
			}
			var o, e bytes.Buffer
			if code := run(context.Background(), []string{"import", "readings", sites}, env, &o, &e); code != 1 || !strings.Contains(o.String()+e.String(), "not a reading column") {
				t.Errorf("import readings: exit %d: %s", code, e.String())
			}
			if code := run(context.Background(), []string{"import", "sites", filepath.Join(dir, "missing.csv")}, env, &o, &e); code != 1 {
				t.Errorf("import of a missing file: exit %d", code)
			}
		})
	}
}

func TestByteLimit(t *testing.T) {
	t.Parallel()
	for in, want := range map[string]int64{"": 0, "1048576": 1 << 20} {
		if got, err := byteLimit("--x", in); err != nil || got != want {
			t.Errorf("byteLimit(%q) = %d, %v", in, got, err)
		}
	}
	for _, in := range []string{"0", "-5", "32MiB"} {
		if _, err := byteLimit("--x", in); err == nil {
			t.Errorf("byteLimit(%q) accepted", in)
		}
	}
}

// slowJob takes a while and records when it finished.
type slowJob struct {
	started  chan struct{}
	finished *atomic.Int64 // UnixNano
}

func (slowJob) Name() string { return "sweep" }

func (j slowJob) Run(ctx context.Context, _ time.Time, progress func(int, int)) (jobs.Stats, error) {
	close(j.started)
	time.Sleep(1500 * time.Millisecond)
	j.finished.Store(time.Now().UnixNano())
	return jobs.Stats{Note: "swept"}, nil
}

// TestServeWaitsForRunningJob starts serve with a job, starts a manual run
// through the API and shuts the server down while it runs: serve returns
// only after the job has finished and its row is written.
func TestServeWaitsForRunningJob(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			secret, err := store.NewSecret()
			if err != nil {
				t.Fatal(err)
			}
			url := storetest.URL(t, d)
			env := map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_BOOTSTRAP_TOKEN": secret, "KELVARD_LOG_LEVEL": "info"}
			job := slowJob{started: make(chan struct{}), finished: &atomic.Int64{}}
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			out, errOut := &syncBuffer{}, &syncBuffer{}
			done := make(chan error, 1)
			go func() {
				done <- cmdServe(ctx, []string{"--listen", "127.0.0.1:0"}, func(k string) string { return env[k] }, out, errOut,
					func(*store.Store, *slog.Logger, jobOptions) []jobs.Job { return []jobs.Job{job} })
			}()
			var base string
			deadline := time.Now().Add(30 * time.Second)
			for base == "" {
				if m := addrRE.FindStringSubmatch(out.String()); m != nil {
					base = m[1]
				} else if time.Now().After(deadline) {
					t.Fatalf("serve printed no address: %s", errOut.String())
				}
				time.Sleep(20 * time.Millisecond)
			}
			code, body := call(t, "POST", base+"/api/v1/jobs/sweep/run", secret, "")
			var run store.JobRun
			if code != http.StatusAccepted || json.Unmarshal(body, &run) != nil || run.Status != store.JobRunning {
				t.Fatalf("start run: %d %s", code, body)
			}
			<-job.started
			cancel() // SIGTERM
			select {
			case err := <-done:
				if err != nil {
					t.Fatalf("serve: %v", err)
				}
			case <-time.After(30 * time.Second):
				t.Fatal("serve did not stop")
			}
			returned := time.Now().UnixNano()
			if f := job.finished.Load(); f == 0 || f > returned {
				t.Fatalf("serve returned before the running job finished")
			}
			st, err := store.Open(context.Background(), url, store.Options{})
			if err != nil {
				t.Fatal(err)
			}
			defer st.Close()
			got, err := st.JobRun(context.Background(), run.ID)
			if err != nil || got.Status != store.JobSucceeded || got.Note != "swept" {
				t.Errorf("run after shutdown: %v %+v", err, got)
			}
			if !strings.Contains(errOut.String(), `"job runs on request only"`) || !strings.Contains(errOut.String(), `"job":"sweep"`) {
				t.Errorf("log does not say sweep runs on request only:\n%s", errOut.String())
			}
		})
	}
}

// TestServeSchedulerOff: a replica with the scheduler off still lists runs.
func TestServeSchedulerOff(t *testing.T) {
	t.Parallel()
	secret, err := store.NewSecret()
	if err != nil {
		t.Fatal(err)
	}
	env := map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, store.SQLite), "KELVARD_BOOTSTRAP_TOKEN": secret,
		"KELVARD_LOG_LEVEL": "info", "KELVARD_SCHEDULER": "off"}
	srv := startServe(t, env)
	code, body := call(t, "GET", srv.base+"/api/v1/jobs", secret, "")
	if code != http.StatusOK || !strings.Contains(string(body), `"items":[]`) {
		t.Errorf("list runs: %d %s", code, body)
	}
	srv.stop(t)
	if !strings.Contains(srv.stderr.String(), "scheduler off on this replica") {
		t.Errorf("log does not say the scheduler is off:\n%s", srv.stderr.String())
	}
}

// TestServeRefusesBadJobSettings: bad scheduler settings are usage errors
// (exit status 2) that name the setting.
func TestServeRefusesBadJobSettings(t *testing.T) {
	t.Parallel()
	url := storetest.URL(t, store.SQLite)
	cases := []struct {
		env  map[string]string
		args []string
		want string
	}{
		{map[string]string{"KELVARD_SCHEDULER": "sometimes"}, nil, `--scheduler "sometimes"`},
		{map[string]string{"KELVARD_ASSESS_SCHEDULE": "every minute"}, nil, `assess schedule "every minute"`},
		{nil, []string{"--plan-schedule", "@every 1h"}, "@every"},
		{nil, []string{"--job-stale-after", "soon"}, "job-stale-after"},
	}
	for _, c := range cases {
		env := map[string]string{"KELVARD_DATABASE_URL": url, "KELVARD_LOG_LEVEL": "warn"}
		for k, v := range c.env {
			env[k] = v
		}
		var out, errOut bytes.Buffer
		args := append([]string{"serve", "--listen", "127.0.0.1:0"}, c.args...)
		code := run(context.Background(), args, func(k string) string { return env[k] }, &out, &errOut)
		if code != 2 || !strings.Contains(errOut.String(), c.want) {
			t.Errorf("%v %v: exit %d, stderr %q; want 2 and %q", c.env, c.args, code, errOut.String(), c.want)
		}
	}
}

// TestServeDemoNewcomer is a newcomer's first minutes: `serve --demo`
// prints an address and a token; in the pages they sign in with it, find
// the riskiest drive at the top of the fleet, and open it to see why: its
// findings with their evidence. Then, in a headless browser, the same
// newcomer goes on from the drive to its work order and approves it.
func TestServeDemoNewcomer(t *testing.T) {
	if testing.Short() {
		t.Skip("loads the demo fleet")
	}
	t.Parallel()
	env := map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, store.SQLite), "KELVARD_LOG_LEVEL": "warn"}
	srv := startServe(t, env, "--demo")
	m := regexp.MustCompile(`admin token \(shown once\): (\S+)`).FindStringSubmatch(srv.stdout.String())
	if m == nil {
		t.Fatalf("serve --demo printed no token: %s", srv.stdout.String())
	}
	jar, _ := cookiejar.New(nil)
	c := &http.Client{Jar: jar}
	get := func(path string) *goquery.Document {
		t.Helper()
		res, err := c.Get(srv.base + path)
		if err != nil {
			t.Fatal(err)
		}
		defer res.Body.Close()
		doc, err := goquery.NewDocumentFromReader(res.Body)
		if err != nil || res.StatusCode != http.StatusOK {
			t.Fatalf("GET %s: %d %v", path, res.StatusCode, err)
		}
		return doc
	}
	form := get("/").Find(`form[action="/signin"]`)
	if form.Length() != 1 {
		t.Fatal("the address does not lead to the sign-in form")
	}
	res, err := c.PostForm(srv.base+"/signin", url.Values{"csrf": {form.Find(`input[name="csrf"]`).AttrOr("value", "")}, "token": {m[1]}})
	if err != nil {
		t.Fatal(err)
	}
	doc, err := goquery.NewDocumentFromReader(res.Body)
	res.Body.Close()
	if err != nil || res.Request.URL.Path != "/fleet" {
		t.Fatalf("signing in with the printed token led to %s: %v", res.Request.URL, err)
	}
	top := doc.Find("table.fleet tbody tr").First()
	href, ok := top.Find("td").Eq(1).Find("a").Attr("href")
	if !ok {
		t.Fatal("the fleet page lists no drive")
	}
	drive := get(href)
	why := drive.Find("#findings article.finding").First()
	if why.Length() == 0 || why.Find("table.evidence tbody tr").Length() == 0 || why.Find(".remedy").Length() == 0 {
		t.Fatalf("the riskiest drive (%s) does not show why: %s", strings.Join(strings.Fields(top.Text()), " "), strings.Join(strings.Fields(drive.Find("#findings").Text()), " "))
	}
	// The first planning pass ran before /readyz turned ready.
	code, body := call(t, "GET", srv.base+"/api/v1/work-orders?status=proposed", m[1], "")
	if code != http.StatusOK || !strings.Contains(string(body), `"status":"proposed"`) {
		t.Fatalf("no proposed work orders once ready: %d %.300s", code, body)
	}
	t.Run("browser", func(t *testing.T) { newcomerBrowser(t, srv.base, m[1]) })
}

// newcomerBrowser walks the newcomer's way in Chromium, by the links and
// buttons a person would use: the printed address, the sign-in form with
// the printed token, the riskiest drive at the top of the fleet, why it is
// risky, its work order, and the approval. Each page is checked with
// axe-core and screenshotted (test-output/newcomer/).
func newcomerBrowser(t *testing.T, base, token string) {
	b := browsertest.New(t, base, "newcomer")
	b.Open("/")
	if loc := b.Location(); !strings.HasPrefix(loc, "/signin") {
		t.Fatalf("the printed address leads to %s, want the sign-in form", loc)
	}
	b.Check("01-signin")
	b.Do("sign in", chromedp.SendKeys(chromedp.CSS("#token"), token), chromedp.Submit(chromedp.CSS("#token")),
		chromedp.WaitVisible(chromedp.CSS("table.fleet")))
	b.Check("02-fleet")
	if rank := strings.TrimSpace(b.Text("table.fleet tbody tr:first-child td:first-child")); rank != "1" {
		t.Fatalf("the fleet's first row is rank %q", rank)
	}
	serial := strings.TrimSpace(b.Text("table.fleet tbody tr:first-child td:nth-child(3) a"))
	b.Do("open the riskiest drive", chromedp.Click(chromedp.CSS("table.fleet tbody tr:first-child td:nth-child(3) a")),
		chromedp.WaitVisible(chromedp.CSS("#findings")))
	if h := b.Text("h1"); !strings.Contains(h, serial) {
		t.Fatalf("the drive page is %q, want drive %s", h, serial)
	}
	evidence := browsertest.Value(b, "evidence", chromedp.Evaluate[int](`document.querySelectorAll("#findings article.finding:first-of-type table.evidence tbody tr").length`))
	why := b.Text("#findings article.finding h3")
	if evidence == 0 || why == "" {
		t.Fatalf("the riskiest drive %s does not show why it is risky", serial)
	}
	b.Check("03-riskiest-drive")
	b.Do("open its work order", chromedp.Click(chromedp.CSS("#work table.work tbody tr:first-child th a")),
		chromedp.WaitVisible(chromedp.CSS(`form[action$="/approve"] button`)))
	order := b.Location()
	if n := browsertest.Value(b, "caution", chromedp.Evaluate[int](`document.querySelectorAll("main > .caution").length`)); n != 1 {
		t.Error("the work order shows no safety caution")
	}
	b.Check("04-work-order")
	b.Do("approve", chromedp.Click(chromedp.CSS(`form[action$="/approve"] button`)), chromedp.WaitVisible(chromedp.CSS("p.notice")))
	if notice, status := b.Text("p.notice"), b.Text("h1 .status"); !strings.Contains(notice, "approved") || strings.TrimSpace(status) != "approved" {
		t.Errorf("after approving: notice %q, status %q", notice, status)
	}
	b.Check("05-approved")
	code, body := call(t, "GET", base+"/api/v1"+order, token, "")
	if code != http.StatusOK || !strings.Contains(string(body), `"status":"approved"`) || !strings.Contains(string(body), `"approved_by":"token:`) {
		t.Errorf("the API's %s after approving in the browser: %d %.300s", order, code, body)
	}
	t.Logf("the newcomer approved %s for drive %s: %s", order, serial, why)
}

// TestServeIngestLimits starts the server with the ingest limits set by
// environment and by flag, and checks both hold.
func TestServeIngestLimits(t *testing.T) {
	t.Parallel()
	secret, err := store.NewSecret()
	if err != nil {
		t.Fatal(err)
	}
	env := map[string]string{"KELVARD_DATABASE_URL": storetest.URL(t, store.SQLite), "KELVARD_BOOTSTRAP_TOKEN": secret,
		"KELVARD_LOG_LEVEL": "warn", "KELVARD_MAX_INGEST_ROWS": "2"}
	srv := startServe(t, env, "--max-ingest-bytes", "300")
	post := func(body string) int {
		req, _ := http.NewRequest(http.MethodPost, srv.base+"/api/v1/readings", strings.NewReader(body))
		req.Header.Set("Authorization", "Bearer "+secret)
		req.Header.Set("Content-Type", "text/csv")
		resp, err := http.DefaultClient.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp.StatusCode
	}
	// No such position: the rows are read and refused (422), not too many.
	if code := post("position,at\nP-1,2024-01-01T00:00:00Z\nP-1,2024-01-01T01:00:00Z\n"); code != http.StatusUnprocessableEntity {
		t.Errorf("two rows: %d, want 422", code)
	}
	if code := post("position,at\nP-1,2024-01-01T00:00:00Z\nP-1,2024-01-01T01:00:00Z\nP-1,2024-01-01T02:00:00Z\n"); code != http.StatusRequestEntityTooLarge {
		t.Errorf("three rows over KELVARD_MAX_INGEST_ROWS=2: %d, want 413", code)
	}
	if code := post("position,at\n" + strings.Repeat(" ", 300) + "\n"); code != http.StatusRequestEntityTooLarge {
		t.Errorf("body over --max-ingest-bytes 300: %d, want 413", code)
	}
}

func TestBenchAndLimitArguments(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		args []string
		env  map[string]string
		code int
		says string
	}{
		{[]string{"bench"}, nil, 2, "usage: kelvard bench ingest"},
		{[]string{"bench", "frob"}, nil, 2, "usage: kelvard bench ingest"},
		{[]string{"bench", "load"}, nil, 1, "needs a PostgreSQL database"},
		{[]string{"bench", "load", "--rate", "5001"}, nil, 2, "rate 5001 requests/s: want 1 to 5000"},
		{[]string{"bench", "load", "--duration", "11m"}, nil, 2, "duration 11m0s: want 1s to 10m0s"},
		{[]string{"bench", "load", "--workers", "20", "--max-workers", "10"}, nil, 2, "want 1 ≤ workers ≤ max workers"},
		{[]string{"bench", "assess"}, nil, 1, "needs a PostgreSQL database"},
		{[]string{"bench", "assess", "--drives", "-3"}, nil, 2, "--drives must be at least 1"},
		{[]string{"bench", "assess", "--drives", "20", "--scrape-drives", "10"}, nil, 2, "--scrape-drives at least --drives"},
		{[]string{"bench", "ingest", "-n", "0"}, nil, 2, "must be positive"},
		{[]string{"bench", "ingest", "--database-url", "sqlite:x.db"}, nil, 1, "needs a PostgreSQL database"},
		{[]string{"serve"}, map[string]string{"KELVARD_MAX_INGEST_ROWS": "many"}, 2, "KELVARD_MAX_INGEST_ROWS"},
		{[]string{"serve"}, map[string]string{"KELVARD_MAX_INGEST_BYTES": "-1"}, 2, "KELVARD_MAX_INGEST_BYTES"},
	} {
		var out, errOut bytes.Buffer
		getenv := func(k string) string { return c.env[k] }
		if code := run(context.Background(), c.args, getenv, &out, &errOut); code != c.code || !strings.Contains(errOut.String(), c.says) {
			t.Errorf("kelvard %v: exit %d, want %d; stderr %q does not say %q", c.args, code, c.code, errOut.String(), c.says)
		}
	}
}
