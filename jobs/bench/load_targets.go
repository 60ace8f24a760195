package bench

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"math/rand/v2"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"sync"
	"time"

	vegeta "github.com/tsenart/vegeta/v12/lib"

	"kelvard/health"
	"kelvard/store"
)

// endpoint is one kind of request in the load mix.
type endpoint struct {
	name  string
	share int // percent of all requests
	read  bool
}

// The endpoints of the mix, by index into loadMix.
const (
	drivesEndpoint = iota
	healthEndpoint
	findingsEndpoint
	readingsEndpoint
	postEndpoint
)

// loadMix is the request mix of `kelvard bench load`; the shares add up
// to 100.
var loadMix = []endpoint{
	drivesEndpoint:   {"GET /api/v1/drives?limit=50 (filtered)", 40, true},
	healthEndpoint:   {"GET /api/v1/drives/{id}/health", 25, true},
	findingsEndpoint: {"GET /api/v1/findings (filtered)", 15, true},
	readingsEndpoint: {"GET /api/v1/drives/{id}/readings (a week)", 10, true},
	postEndpoint:     {"POST /api/v1/readings (100 rows, JSON)", 10, false},
}

// postRows is how many readings one post carries.
const postRows = 100

// classify returns the loadMix index of a request, or -1.
func classify(method, rawURL string) int {
	if method == http.MethodPost {
		return postEndpoint
	}
	u, err := url.Parse(rawURL)
	if err != nil {
		return -1
	}
	switch p := u.Path; {
	case strings.HasSuffix(p, "/health"):
		return healthEndpoint
	case strings.HasSuffix(p, "/readings"):
		return readingsEndpoint
	case strings.HasSuffix(p, "/findings"):
		return findingsEndpoint
	case strings.HasSuffix(p, "/drives"):
		return drivesEndpoint
	}
	return -1
}

// fleetTargets is what the requests are made of, read from the loaded
// fleet.
type fleetTargets struct {
	sites, models []int64
	// assessed are the drives with an assessment (their health answers).
	assessed []int64
	// spans are the drives with at least eight days of readings.
	spans []readingSpan
	// posts are the installed drives' positions with their latest
	// reading, the pattern of the readings posted to them.
	posts []postTemplate
	// lastReading is the latest reading time in the fleet; posts go after.
	lastReading time.Time
	// counts: sites, positions, drives, readings, open findings.
	counts [5]int
}

type readingSpan struct {
	drive       int64
	first, last time.Time
}

// postTemplate is a position with a drive installed and that drive's
// latest reading there; posted readings vary it a little.
type postTemplate struct {
	site, tag string
	at        time.Time
	// vals are internal_air_c, ambient_c, heatsink_c, current_a,
	// peak_current_a, frequency_hz, bus_v, bus_ripple_v, run_hours_h and
	// power_on_hours_h.
	vals [10]sql.NullFloat64
}

// readTargets reads the ids, windows and templates the requests use.
func readTargets(ctx context.Context, db *sql.DB) (fleetTargets, error) {
	var tg fleetTargets
	ids := func(what, q string) ([]int64, error) {
		rows, err := db.QueryContext(ctx, q)
		if err != nil {
			return nil, fmt.Errorf("read %s: %w", what, err)
		}
		defer rows.Close()
		var out []int64
		for rows.Next() {
			var id int64
			if err := rows.Scan(&id); err != nil {
				return nil, fmt.Errorf("read %s: %w", what, err)
			}
			out = append(out, id)
		}
		if err := rows.Err(); err != nil {
			return nil, fmt.Errorf("read %s: %w", what, err)
		}
		if len(out) == 0 {
			return nil, fmt.Errorf("the fleet has no %s", what)
		}
		return out, nil
	}
	var err error
	if tg.sites, err = ids("sites", "SELECT id FROM sites ORDER BY id"); err != nil {
		return tg, err
	}
	if tg.models, err = ids("drive models", "SELECT id FROM drive_models ORDER BY id"); err != nil {
		return tg, err
	}
	if tg.assessed, err = ids("assessed drives", "SELECT drive_id FROM assessments ORDER BY drive_id"); err != nil {
		return tg, err
	}

	rows, err := db.QueryContext(ctx, `SELECT drive_id, min(at), max(at) FROM readings GROUP BY drive_id
		HAVING max(at) - min(at) >= interval '8 days' ORDER BY drive_id`)
	if err != nil {
		return tg, fmt.Errorf("read reading spans: %w", err)
	}
	for rows.Next() {
		var s readingSpan
		if err := rows.Scan(&s.drive, &s.first, &s.last); err != nil {
			rows.Close()
			return tg, fmt.Errorf("read reading spans: %w", err)
		}
		tg.spans = append(tg.spans, s)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return tg, fmt.Errorf("read reading spans: %w", err)
	}

	// The template of a position is its drive's latest reading there
	// within the drive's present stay, so every posted time lies after
	// the drive was installed.
	rows, err = db.QueryContext(ctx, `SELECT s.name, p.tag, r.at, r.internal_air_c, r.ambient_c, r.heatsink_c, r.current_a,
		       r.peak_current_a, r.frequency_hz, r.bus_v, r.bus_ripple_v, r.run_hours_h, r.power_on_hours_h
		FROM drives d
		JOIN installations i ON i.drive_id = d.id AND i.position_id = d.position_id AND i.removed_at IS NULL
		JOIN positions p ON p.id = d.position_id
		JOIN sites s ON s.id = p.site_id
		CROSS JOIN LATERAL (SELECT * FROM readings r WHERE r.drive_id = d.id AND r.position_id = d.position_id
		                    ORDER BY r.at DESC LIMIT 1) r
		WHERE d.status = 'installed' AND r.at >= i.installed_at
		ORDER BY p.id`)
	if err != nil {
		return tg, fmt.Errorf("read the posted positions: %w", err)
	}
	for rows.Next() {
		var t postTemplate
		dst := []any{&t.site, &t.tag, &t.at}
		for i := range t.vals {
			dst = append(dst, &t.vals[i])
		}
		if err := rows.Scan(dst...); err != nil {
			rows.Close()
			return tg, fmt.Errorf("read the posted positions: %w", err)
		}
		tg.posts = append(tg.posts, t)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return tg, fmt.Errorf("read the posted positions: %w", err)
	}
	if len(tg.spans) == 0 || len(tg.posts) == 0 {
		return tg, fmt.Errorf("the fleet has %d drives with a week of readings and %d installed drives with readings: too few to load",
			len(tg.spans), len(tg.posts))
	}
	var last sql.NullTime
	if err := db.QueryRowContext(ctx, `SELECT max(at), (SELECT count(*) FROM sites), (SELECT count(*) FROM positions),
		(SELECT count(*) FROM drives), (SELECT count(*) FROM readings), (SELECT count(*) FROM findings WHERE status = 'open')
		FROM readings`).Scan(&last, &tg.counts[0], &tg.counts[1], &tg.counts[2], &tg.counts[3], &tg.counts[4]); err != nil {
		return tg, fmt.Errorf("count the fleet: %w", err)
	}
	if !last.Valid {
		return tg, errors.New("the fleet has no readings")
	}
	tg.lastReading = last.Time.UTC()
	return tg, nil
}

// targeter makes the attack's requests: the endpoint by the mix's shares,
// the ids, filters and weeks from a seeded generator, and for posts fresh
// (drive, time) keys. Its target method is safe for concurrent use.
type targeter struct {
	base   string
	header http.Header
	post   http.Header
	tg     fleetTargets

	severities, kinds []string

	mu  sync.Mutex
	rng *rand.Rand
	// Post slot n is position n % len(tg.posts) at
	// tg.lastReading + (n/len(tg.posts) + 1) × step.
	slot int
	step time.Duration
}

// newTargeter plans posts so that maxPosts of them fit between the fleet's
// last reading and now.
func newTargeter(base, secret string, tg fleetTargets, seed uint64, now time.Time, maxPosts int) (*targeter, error) {
	perPosition := (maxPosts*postRows + len(tg.posts) - 1) / len(tg.posts)
	step := (now.Sub(tg.lastReading) / time.Duration(perPosition+1)).Truncate(time.Microsecond)
	if step < time.Millisecond {
		return nil, fmt.Errorf("%d posts do not fit between the fleet's last reading (%s) and now a millisecond apart",
			maxPosts, tg.lastReading.Format(time.RFC3339))
	}
	g := &targeter{base: base, tg: tg, step: step, rng: rand.New(rand.NewPCG(seed, 0x6c6f6164)),
		header: http.Header{"Authorization": {"Bearer " + secret}, "Accept": {"application/json"}},
		post:   http.Header{"Authorization": {"Bearer " + secret}, "Accept": {"application/json"}, "Content-Type": {"application/json"}}}
	for _, s := range health.Severities() {
		g.severities = append(g.severities, string(s))
	}
	for _, k := range health.Kinds() {
		g.kinds = append(g.kinds, string(k))
	}
	return g, nil
}

// target is the vegeta.Targeter.
func (g *targeter) target(t *vegeta.Target) error {
	g.mu.Lock()
	defer g.mu.Unlock()
	pick := func(ids []int64) string { return strconv.FormatInt(ids[g.rng.IntN(len(ids))], 10) }
	t.Method, t.Header, t.Body = http.MethodGet, g.header, nil
	roll, k := g.rng.IntN(100), 0
	for ; k < len(loadMix)-1 && roll >= loadMix[k].share; k++ {
		roll -= loadMix[k].share
	}
	switch k {
	case drivesEndpoint:
		q := url.Values{"limit": {"50"}}
		switch g.rng.IntN(5) {
		case 1:
			q.Set("site_id", pick(g.tg.sites))
		case 2:
			q.Set("status", string(health.StatusInstalled))
		case 3:
			q.Set("site_id", pick(g.tg.sites))
			q.Set("status", string(health.StatusInstalled))
		case 4:
			q.Set("model_id", pick(g.tg.models))
		}
		t.URL = g.base + "/api/v1/drives?" + q.Encode()
	case healthEndpoint:
		t.URL = g.base + "/api/v1/drives/" + pick(g.tg.assessed) + "/health"
	case findingsEndpoint:
		q := url.Values{"limit": {"50"}}
		switch g.rng.IntN(5) {
		case 1:
			q.Set("severity", g.severities[g.rng.IntN(len(g.severities))])
		case 2:
			q.Set("site_id", pick(g.tg.sites))
		case 3:
			q.Set("kind", g.kinds[g.rng.IntN(len(g.kinds))])
		case 4:
			q.Set("site_id", pick(g.tg.sites))
			q.Set("severity", g.severities[g.rng.IntN(len(g.severities))])
		}
		t.URL = g.base + "/api/v1/findings?" + q.Encode()
	case readingsEndpoint:
		s := g.tg.spans[g.rng.IntN(len(g.tg.spans))]
		hours := int64(s.last.Sub(s.first)/time.Hour) - 7*24
		from := s.first.Truncate(time.Hour).Add(time.Duration(g.rng.Int64N(hours+1)) * time.Hour)
		q := url.Values{"from": {from.Format(time.RFC3339)}, "to": {from.Add(7 * 24 * time.Hour).Format(time.RFC3339)}}
		t.URL = g.base + "/api/v1/drives/" + strconv.FormatInt(s.drive, 10) + "/readings?" + q.Encode()
	default:
		t.Method, t.Header = http.MethodPost, g.post
		t.URL = g.base + "/api/v1/readings"
		t.Body = jsonBody(g.postRows())
	}
	return nil
}

// postRows makes the next post's rows; g.mu is held.
func (g *targeter) postRows() []store.Reading {
	rows := make([]store.Reading, postRows)
	n := len(g.tg.posts)
	for i := range rows {
		p := &g.tg.posts[g.slot%n]
		at := g.tg.lastReading.Add(time.Duration(g.slot/n+1) * g.step)
		g.slot++
		r := store.Reading{Site: p.site, Position: p.tag, At: at}
		jitter := func(j int, spread float64) *float64 {
			if !p.vals[j].Valid {
				return nil
			}
			return ptr(round2(p.vals[j].Float64 + spread*(2*g.rng.Float64()-1)))
		}
		scale := func(j int, lo float64) *float64 {
			if !p.vals[j].Valid {
				return nil
			}
			return ptr(round2(p.vals[j].Float64 * (lo + (1-lo)*g.rng.Float64())))
		}
		hours := func(j int) *float64 {
			if !p.vals[j].Valid {
				return nil
			}
			return ptr(round2(p.vals[j].Float64 + at.Sub(p.at).Hours()))
		}
		keep := func(j int) *float64 {
			if !p.vals[j].Valid {
				return nil
			}
			return ptr(p.vals[j].Float64)
		}
		r.InternalAirC, r.AmbientC, r.HeatsinkC = jitter(0, 0.3), jitter(1, 0.3), jitter(2, 0.5)
		r.CurrentA, r.PeakCurrentA, r.FrequencyHz = scale(3, 0.97), scale(4, 0.97), keep(5)
		if r.CurrentA != nil && r.PeakCurrentA != nil && *r.PeakCurrentA < *r.CurrentA {
			r.PeakCurrentA = ptr(*r.CurrentA)
		}
		r.BusV, r.BusRippleV = jitter(6, 0.5), scale(7, 0.95)
		r.RunHoursH, r.PowerOnHoursH = hours(8), hours(9)
		rows[i] = r
	}
	return rows
}
