package bench

import (
	"database/sql"
	"encoding/json"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	vegeta "github.com/tsenart/vegeta/v12/lib"
)

// testTargets is a small fleet of three positions at two sites, the
// second one's tag repeating the first's.
func testTargets(last time.Time) fleetTargets {
	f := func(v float64) sql.NullFloat64 { return sql.NullFloat64{Float64: v, Valid: true} }
	tpl := func(site, tag string) postTemplate {
		return postTemplate{site: site, tag: tag, at: last.Add(-time.Hour),
			vals: [10]sql.NullFloat64{f(31), f(24), f(48), f(40), f(52), f(45), f(678), f(5), f(20000), {}}}
	}
	return fleetTargets{sites: []int64{1, 2}, models: []int64{7}, assessed: []int64{10, 11, 12},
		spans:       []readingSpan{{drive: 10, first: last.AddDate(0, 0, -30), last: last}, {drive: 11, first: last.AddDate(0, 0, -9), last: last}},
		posts:       []postTemplate{tpl("North", "P-1"), tpl("North", "P-2"), tpl("South", "P-1")},
		lastReading: last}
}

// TestTargeterMixAndPosts draws many requests from several goroutines and
// checks the mix's shares, the query parameters, the week windows, and
// that every posted reading has a fresh (position, time) key between the
// fleet's last reading and now, with plausible values.
func TestTargeterMixAndPosts(t *testing.T) {
	now := time.Date(2026, 3, 1, 12, 34, 0, 0, time.UTC)
	last := now.Truncate(time.Hour).Add(-2 * time.Hour)
	const n = 20000
	g, err := newTargeter("http://127.0.0.1:1", "s3cret", testTargets(last), 1, now, n/10*2)
	if err != nil {
		t.Fatal(err)
	}
	var (
		mu      sync.Mutex
		targets []vegeta.Target
		wg      sync.WaitGroup
	)
	for range 4 {
		wg.Go(func() {
			for range n / 4 {
				var tg vegeta.Target
				if err := g.target(&tg); err != nil {
					t.Error(err)
					return
				}
				mu.Lock()
				targets = append(targets, tg)
				mu.Unlock()
			}
		})
	}
	wg.Wait()

	count := make([]int, len(loadMix))
	seen := map[string]bool{}
	for _, tg := range targets {
		k := classify(tg.Method, tg.URL)
		if k < 0 {
			t.Fatalf("unclassified request %s %s", tg.Method, tg.URL)
		}
		count[k]++
		if tg.Header.Get("Authorization") != "Bearer s3cret" {
			t.Fatalf("%s without the token", tg.URL)
		}
		u, err := url.Parse(tg.URL)
		if err != nil {
			t.Fatal(err)
		}
		q := u.Query()
		switch k {
		case drivesEndpoint, findingsEndpoint:
			if q.Get("limit") != "50" {
				t.Errorf("%s: limit %q", tg.URL, q.Get("limit"))
			}
			if s := q.Get("site_id"); s != "" && s != "1" && s != "2" {
				t.Errorf("%s: unknown site", tg.URL)
			}
		case healthEndpoint:
			if !strings.Contains("/api/v1/drives/10/health /api/v1/drives/11/health /api/v1/drives/12/health", u.Path) {
				t.Errorf("health of an unassessed drive: %s", u.Path)
			}
		case readingsEndpoint:
			from, err1 := time.Parse(time.RFC3339, q.Get("from"))
			to, err2 := time.Parse(time.RFC3339, q.Get("to"))
			if err1 != nil || err2 != nil || to.Sub(from) != 7*24*time.Hour || from.Before(last.AddDate(0, 0, -30)) || to.After(last) {
				t.Errorf("week window %s", tg.URL)
			}
		case postEndpoint:
			if tg.Header.Get("Content-Type") != "application/json" || u.Path != "/api/v1/readings" {
				t.Errorf("post %s %v", u.Path, tg.Header)
			}
			var rows []map[string]any
			if err := json.Unmarshal(tg.Body, &rows); err != nil {
				t.Fatalf("post body: %v\n%s", err, tg.Body)
			}
			if len(rows) != postRows {
				t.Errorf("post of %d rows", len(rows))
			}
			for _, r := range rows {
				at, err := time.Parse(time.RFC3339Nano, r["at"].(string))
				if err != nil || !at.After(last) || at.After(now) {
					t.Fatalf("posted time %v outside (%s, %s]", r["at"], last, now)
				}
				key := r["site"].(string) + "/" + r["position"].(string) + "@" + r["at"].(string)
				if seen[key] {
					t.Fatalf("key %s posted twice", key)
				}
				seen[key] = true
				if c, p := r["current_a"].(float64), r["peak_current_a"].(float64); c < 38 || c > 40 || p < c || p > 52 {
					t.Errorf("current %g A, peak %g A from a 40 A, 52 A pattern", c, p)
				}
				if h := r["run_hours_h"].(float64); h < 20001 || h > 20003.6 {
					t.Errorf("run hours %g, not 1 to 3.6 h (the time since the pattern) after 20000", h)
				}
				if r["power_on_hours_h"] != nil {
					t.Errorf("a value the pattern lacks was posted: %v", r["power_on_hours_h"])
				}
			}
		}
	}
	for k, e := range loadMix {
		got := 100 * float64(count[k]) / n
		if got < float64(e.share)-1.5 || got > float64(e.share)+1.5 {
			t.Errorf("%s: %.1f %% of requests, want %d %%", e.name, got, e.share)
		}
	}
	if len(seen) != count[postEndpoint]*postRows {
		t.Errorf("%d distinct keys in %d posts", len(seen), count[postEndpoint])
	}
}

// TestTargeterIsDeterministic draws the same requests from the same seed.
func TestTargeterIsDeterministic(t *testing.T) {
	now := time.Date(2026, 3, 1, 12, 34, 0, 0, time.UTC)
	last := now.Truncate(time.Hour).Add(-2 * time.Hour)
	draw := func(seed uint64) string {
		g, err := newTargeter("http://127.0.0.1:1", "x", testTargets(last), seed, now, 100)
		if err != nil {
			t.Fatal(err)
		}
		var b strings.Builder
		for range 200 {
			var tg vegeta.Target
			if err := g.target(&tg); err != nil {
				t.Fatal(err)
			}
			b.WriteString(tg.Method + " " + tg.URL + " " + strconv.Itoa(len(tg.Body)) + "\n")
		}
		return b.String()
	}
	if a, b := draw(1), draw(1); a != b {
		t.Error("the same seed drew different requests")
	}
	if a, b := draw(1), draw(2); a == b {
		t.Error("two seeds drew the same requests")
	}
}

// TestClassify maps requests back to their endpoints.
func TestClassify(t *testing.T) {
	for _, c := range []struct {
		method, url string
		want        int
	}{
		{http.MethodGet, "http://h/api/v1/drives?limit=50&site_id=2", drivesEndpoint},
		{http.MethodGet, "http://h/api/v1/drives/12/health", healthEndpoint},
		{http.MethodGet, "http://h/api/v1/findings?severity=major", findingsEndpoint},
		{http.MethodGet, "http://h/api/v1/drives/12/readings?from=a&to=b", readingsEndpoint},
		{http.MethodPost, "http://h/api/v1/readings", postEndpoint},
		{http.MethodGet, "http://h/api/v1/sites", -1},
	} {
		if got := classify(c.method, c.url); got != c.want {
			t.Errorf("%s %s: %d, want %d", c.method, c.url, got, c.want)
		}
	}
}

// BenchmarkTargeter measures making one request of the mix; the time is
// spent under the targeter's lock and counted in vegeta's latency.
func BenchmarkTargeter(b *testing.B) {
	now := time.Date(2026, 3, 1, 12, 34, 0, 0, time.UTC)
	g, err := newTargeter("http://127.0.0.1:1", "x", testTargets(now.Add(-2*time.Hour)), 1, now, b.N/10*2+100)
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		var tg vegeta.Target
		if err := g.target(&tg); err != nil {
			b.Fatal(err)
		}
	}
}
