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
	"kelvard/store/storetest"
)

// TestPagesOnDemoFleet loads the demo fleet into each store and checks
// every page by its HTML, then (on SQLite) drives a browser through them.
func TestPagesOnDemoFleet(t *testing.T) {
	if testing.Short() {
		t.Skip("loads the demo fleet")
	}
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			f := loadFleet(t, d)
			t.Run("sign in", func(t *testing.T) { testSignIn(t, f) })
			t.Run("fleet", func(t *testing.T) { testFleet(t, f) })
			t.Run("fleet filters", func(t *testing.T) { testFleetFilters(t, f) })
			t.Run("sites", func(t *testing.T) { testSites(t, f) })
			t.Run("drive", func(t *testing.T) { testDrive(t, f) })
			t.Run("position", func(t *testing.T) { testPosition(t, f) })
			t.Run("findings", func(t *testing.T) { testFindings(t, f) })
			t.Run("site limit", func(t *testing.T) { testSiteLimit(t, f) })
			t.Run("units", func(t *testing.T) { testUnits(t, f) })
			t.Run("self-contained", func(t *testing.T) { testSelfContained(t, f) })
			t.Run("work orders", func(t *testing.T) { testWorkOrders(t, f) })
			t.Run("work order", func(t *testing.T) { testWorkOrder(t, f) })
			t.Run("forecast", func(t *testing.T) { testForecast(t, f) })
			t.Run("reliability", func(t *testing.T) { testReliability(t, f) })
			t.Run("planning site limit", func(t *testing.T) { testPlanningSiteLimit(t, f) })
			t.Run("newcomer", func(t *testing.T) { testNewcomer(t, f) })
			t.Run("finding actions", func(t *testing.T) { testFindingActions(t, f) })
			t.Run("work order actions", func(t *testing.T) { testWorkOrderActions(t, f) })
			if d == store.SQLite {
				t.Run("browser", func(t *testing.T) { browserTests(t, f) })
			}
		})
	}
}

func testSignIn(t *testing.T, f *fleet) {
	c := f.newClient(t)
	res, _ := c.get("/drives/1?range=7d")
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/signin?next="+url.QueryEscape("/drives/1?range=7d") {
		t.Fatalf("unsigned page: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	res, doc := c.get(res.Header.Get("Location"))
	if res.StatusCode != http.StatusOK {
		t.Fatalf("sign-in form: %d", res.StatusCode)
	}
	if doc.Find(`label[for="token"]`).Length() != 1 || doc.Find(`input#token[type="password"][required]`).Length() != 1 {
		t.Error("sign-in form lacks its labelled token field")
	}
	csrf, _ := doc.Find(`input[name="csrf"]`).Attr("value")
	next, _ := doc.Find(`input[name="next"]`).Attr("value")
	if csrf == "" || next != "/drives/1?range=7d" {
		t.Errorf("form token %q, next %q", csrf, next)
	}
	for name, tc := range map[string]struct {
		form   url.Values
		status int
	}{
		"wrong token":   {url.Values{"csrf": {csrf}, "token": {"kvd_AAAAAAAA_" + strings.Repeat("x", 43)}}, http.StatusUnauthorized},
		"empty token":   {url.Values{"csrf": {csrf}, "token": {""}}, http.StatusUnprocessableEntity},
		"no form token": {url.Values{"token": {f.viewer}}, http.StatusForbidden},
		"other token":   {url.Values{"csrf": {signinCSRF(f.h.cfg.SessionKey, "someone-else-nonce")}, "token": {f.viewer}}, http.StatusForbidden},
	} {
		res, doc := c.post("/signin", tc.form)
		if res.StatusCode != tc.status || doc.Find("p.error[role=alert]").Length() != 1 {
			t.Errorf("%s: %d, want %d with an error shown", name, res.StatusCode, tc.status)
		}
		if hasCookie(res, sessionCookie) {
			t.Errorf("%s: a session cookie was set", name)
		}
	}
	res, _ = c.post("/signin", url.Values{"csrf": {csrf}, "token": {f.viewer}, "next": {next}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != next {
		t.Fatalf("sign in: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	var sc *http.Cookie
	for _, ck := range res.Cookies() {
		if ck.Name == sessionCookie {
			sc = ck
		}
	}
	if sc == nil || !sc.HttpOnly || sc.SameSite != http.SameSiteStrictMode || sc.Secure || sc.Path != "/" || sc.MaxAge != int((12*time.Hour).Seconds()) {
		t.Fatalf("session cookie %+v: want HttpOnly, SameSite=Strict, path /, not Secure over plain HTTP, 12 h", sc)
	}
	// An open redirect is refused: next must be a path here.
	c2 := f.newClient(t)
	_, doc = c2.get("/signin")
	csrf2, _ := doc.Find(`input[name="csrf"]`).Attr("value")
	res, _ = c2.post("/signin", url.Values{"csrf": {csrf2}, "token": {f.viewer}, "next": {"//elsewhere.example/x"}})
	if res.Header.Get("Location") != "/fleet" {
		t.Errorf("next to another host redirected to %q", res.Header.Get("Location"))
	}

	// A tampered cookie, a cookie signed with another key and a cookie of
	// a revoked token are all refused.
	good := sc.Value
	for name, v := range map[string]string{
		"tampered":  strings.Replace(good, good[:4], "AAAA", 1),
		"other key": mustSession(t, []byte(strings.Repeat("z", 32)), f, f.viewer),
		"garbage":   "x.y",
	} {
		if code := statusWithCookie(t, f, sessionCookie, v, "/fleet"); code != http.StatusSeeOther {
			t.Errorf("%s cookie: %d, want a redirect to sign in", name, code)
		}
	}
	if code := statusWithCookie(t, f, sessionCookie, good, "/fleet"); code != http.StatusOK {
		t.Errorf("good cookie: %d", code)
	}
	ctx := context.Background()
	tok, secret, err := f.st.CreateToken(ctx, store.NewToken{Name: "short-lived", Role: store.RoleViewer})
	if err != nil {
		t.Fatal(err)
	}
	v := mustSession(t, f.h.cfg.SessionKey, f, secret)
	if code := statusWithCookie(t, f, sessionCookie, v, "/fleet"); code != http.StatusOK {
		t.Fatalf("fresh token's session: %d", code)
	}
	if _, err := f.st.RevokeToken(ctx, tok.ID); err != nil {
		t.Fatal(err)
	}
	if code := statusWithCookie(t, f, sessionCookie, v, "/fleet"); code != http.StatusSeeOther {
		t.Errorf("revoked token's session: %d, want a redirect to sign in", code)
	}

	// Signing out needs the form token, clears the cookie and ends the
	// token's earlier sessions on the server: a cookie of an hour ago,
	// copied elsewhere, is refused afterwards.
	outTok, outSecret, err := f.st.CreateToken(ctx, store.NewToken{Name: "signing out", Role: store.RoleViewer})
	if err != nil {
		t.Fatal(err)
	}
	authed, err := f.st.Authenticate(ctx, outSecret)
	if err != nil {
		t.Fatal(err)
	}
	copied, err := newSessionValue(f.h.cfg.SessionKey, outTok.ID, authed.Hash, f.st.Now().Add(-time.Hour), 2*time.Hour)
	if err != nil {
		t.Fatal(err)
	}
	if code := statusWithCookie(t, f, sessionCookie, copied, "/fleet"); code != http.StatusOK {
		t.Fatalf("an hour-old session before signing out: %d", code)
	}
	c3 := f.signedIn(t, outSecret)
	res, _ = c3.post("/signout", url.Values{})
	if res.StatusCode != http.StatusForbidden {
		t.Errorf("sign out without the form token: %d", res.StatusCode)
	}
	res, _ = c3.post("/signout", url.Values{"csrf": {c3.csrf}})
	if res.StatusCode != http.StatusSeeOther || !clearsCookie(res, sessionCookie) {
		t.Errorf("sign out: %d, cookies %v", res.StatusCode, res.Cookies())
	}
	if res, _ := c3.get("/fleet"); res.StatusCode != http.StatusSeeOther {
		t.Errorf("after signing out the fleet answers %d", res.StatusCode)
	}
	if code := statusWithCookie(t, f, sessionCookie, copied, "/fleet"); code != http.StatusSeeOther {
		t.Errorf("a copy of the signed-out session cookie: %d, want a redirect to sign in", code)
	}

	// Behind TLS (told by the flag) cookies are Secure and the session
	// takes the __Host- prefix.
	hs, err := New(f.st, Config{SecureCookies: true, SessionKey: f.h.cfg.SessionKey})
	if err != nil {
		t.Fatal(err)
	}
	rec := httptestRecorder(hs, http.MethodGet, "/signin", nil, nil)
	nonce := ""
	for _, ck := range rec.Result().Cookies() {
		if ck.Name == signinCookie {
			nonce = ck.Value
			if !ck.Secure {
				t.Error("sign-in cookie not Secure with SecureCookies")
			}
		}
	}
	form := url.Values{"csrf": {signinCSRF(hs.cfg.SessionKey, nonce)}, "token": {f.viewer}}
	rec = httptestRecorder(hs, http.MethodPost, "/signin", form, []*http.Cookie{{Name: signinCookie, Value: nonce}})
	var secure *http.Cookie
	for _, ck := range rec.Result().Cookies() {
		if ck.Name == secureSessionCookie {
			secure = ck
		}
	}
	if rec.Code != http.StatusSeeOther || secure == nil || !secure.Secure || !secure.HttpOnly || secure.SameSite != http.SameSiteStrictMode {
		t.Errorf("secure sign in: %d, cookie %+v", rec.Code, secure)
	}
}

func testFleet(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	doc := c.page("/fleet")
	if got := doc.Find("title").Text(); got != "Fleet · kelvard" {
		t.Errorf("title %q", got)
	}
	if doc.Find(`nav[aria-label="Main"] a[aria-current="page"]`).Text() != "Fleet" {
		t.Error("the main navigation does not mark the fleet as current")
	}
	view, err := f.st.Fleet(context.Background(), store.FleetFilter{}, demoNow, 1000, 0)
	if err != nil {
		t.Fatal(err)
	}
	rows := doc.Find("table.fleet tbody tr")
	if rows.Length() != min(len(view.Rows), fleetPageSize) || rows.Length() < 80 {
		t.Fatalf("%d rows, store has %d assessed drives", rows.Length(), len(view.Rows))
	}
	// Ranked by risk: the serials come in the store's risk order, and the
	// risk column never rises.
	prev := 101.0
	rows.Each(func(i int, r *goquery.Selection) {
		serial := text(r.Find("td").Eq(1).Find("a"))
		if serial != view.Rows[i].Serial {
			t.Errorf("row %d is %s, want %s", i+1, serial, view.Rows[i].Serial)
		}
		risk, err := strconv.ParseFloat(text(r.Find("td").Eq(4)), 64)
		if err != nil || risk > prev+0.5 {
			t.Errorf("row %d risk %v after %v", i+1, risk, prev)
		}
		prev = risk
		if r.Find("th[scope=row]").Length() != 1 {
			t.Errorf("row %d has no row header", i+1)
		}
	})
	// Counts by band add up to the drives assessed, and each links to the
	// fleet filtered by that band.
	total := 0
	doc.Find(`section[aria-labelledby="bands-h"] a.count`).Each(func(_ int, a *goquery.Selection) {
		n, _ := strconv.Atoi(text(a.Find(".n")))
		total += n
		band := strings.TrimPrefix(strings.Fields(a.AttrOr("class", ""))[1], "band-")
		if a.AttrOr("href", "") != "/fleet?band="+band || int64(n) != view.Summary.Bands[health.Band(band)] {
			t.Errorf("band count %s: %d linking %q", band, n, a.AttrOr("href", ""))
		}
	})
	if total != len(view.Rows) {
		t.Errorf("band counts add to %d, want %d", total, len(view.Rows))
	}
	// End-of-life windows: 90, 180, 365 days, non-decreasing, the booster
	// kiosk with near-end capacitors inside a year.
	var eol []int
	doc.Find(`section[aria-labelledby="eol-h"] a.count`).Each(func(_ int, a *goquery.Selection) {
		n, _ := strconv.Atoi(text(a.Find(".n")))
		eol = append(eol, n)
	})
	if len(eol) != 3 || eol[0] > eol[1] || eol[1] > eol[2] || eol[2] < 1 {
		t.Errorf("end-of-life counts %v", eol)
	}
	in365 := c.page("/fleet?eol=365")
	if !strings.Contains(text(in365.Find("table.fleet tbody")), "BST-P03") {
		t.Error("BST-P03 (capacitors near end of life in the demo) is not among the drives reaching end of life within 365 days")
	}
	// Every filter has a label.
	doc.Find("form.filters select, form.filters input").Each(func(_ int, s *goquery.Selection) {
		id, _ := s.Attr("id")
		if id == "" || doc.Find(`label[for="`+id+`"]`).Length() != 1 {
			t.Errorf("filter %s has no label", s.AttrOr("name", "?"))
		}
	})
}

func testFleetFilters(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	ctx := context.Background()
	places, err := f.st.Places(ctx)
	if err != nil {
		t.Fatal(err)
	}
	site, area := places[1].Site, places[1].Areas[0]
	cases := []struct {
		query string
		check func(r *goquery.Selection) bool
		what  string
	}{
		{"site=" + strconv.FormatInt(site.ID, 10), func(r *goquery.Selection) bool { return strings.Contains(text(r.Find("td").Eq(2)), site.Name) }, "at " + site.Name},
		{"area=" + strconv.FormatInt(area.ID, 10), func(r *goquery.Selection) bool { return strings.Contains(text(r.Find("td").Eq(2)), area.Name) }, "in " + area.Name},
		{"band=plan", func(r *goquery.Selection) bool { return text(r.Find(".band")) == "Plan" }, "in band plan"},
		{"severity=major", func(r *goquery.Selection) bool {
			s := text(r.Find("td").Last().Find(".sev"))
			return s == "Major" || s == "Critical"
		}, "with a major or critical finding"},
		{"status=installed", func(r *goquery.Selection) bool { return r.Find("th a").Length() == 1 }, "installed"},
		{"status=in_stores", func(r *goquery.Selection) bool { return strings.Contains(text(r.Find("th")), "in stores") }, "in stores"},
		{"q=bst-p0", func(r *goquery.Selection) bool { return strings.HasPrefix(text(r.Find("th a")), "BST-P0") }, "tagged BST-P0…"},
		{"eol=90", func(r *goquery.Selection) bool { return strings.Contains(text(r.Find("td").Eq(5)), "end ") }, "with an end-of-life date"},
	}
	for _, tc := range cases {
		doc := c.page("/fleet?" + tc.query)
		rows := doc.Find("table.fleet tbody tr")
		if rows.Length() == 0 && tc.query != "eol=90" {
			t.Errorf("%s: no drive", tc.query)
		}
		rows.Each(func(i int, r *goquery.Selection) {
			if !tc.check(r) {
				t.Errorf("%s: row %d is not %s: %s", tc.query, i+1, tc.what, text(r))
			}
		})
		if doc.Find(`form.filters a[href="/fleet"]`).Length() != 1 {
			t.Errorf("%s: no way to clear the filters", tc.query)
		}
	}
	for _, bad := range []string{"band=grim", "site=x", "eol=30", "severity=mild", "page=0"} {
		if res, doc := c.get("/fleet?" + bad); res.StatusCode != http.StatusBadRequest || doc.Find("main p").Length() == 0 {
			t.Errorf("%s: %d", bad, res.StatusCode)
		}
	}
}

func testSites(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	ctx := context.Background()
	places, err := f.st.Places(ctx)
	if err != nil {
		t.Fatal(err)
	}
	doc := c.page("/sites")
	if n := doc.Find("section.site-card").Length(); n != len(places) {
		t.Errorf("%d sites listed, want %d", n, len(places))
	}
	for _, sp := range places {
		doc := c.page(fmt.Sprintf("/sites/%d", sp.Site.ID))
		sv, err := f.st.Site(ctx, sp.Site.ID)
		if err != nil {
			t.Fatal(err)
		}
		if n := doc.Find("section.area").Length(); n != len(sv.Areas) {
			t.Errorf("%s: %d areas shown, want %d", sp.Site.Name, n, len(sv.Areas))
		}
		doc.Find("section.area").Each(func(_ int, s *goquery.Selection) {
			if s.Find("dl.facts dt").Length() != 9 {
				t.Errorf("%s: area %s shows %d environment facts, want 9", sp.Site.Name, text(s.Find("h2")), s.Find("dl.facts dt").Length())
			}
		})
		rows := doc.Find("table.verdicts tbody tr")
		if rows.Length() != len(sv.Positions) {
			t.Errorf("%s: %d position rows, want %d", sp.Site.Name, rows.Length(), len(sv.Positions))
		}
		rows.Each(func(_ int, r *goquery.Selection) {
			tag := text(r.Find("th a"))
			empty := strings.Contains(text(r), "No drive stands here")
			verdict := r.Find("td .verdict-tag").First()
			switch {
			case empty:
			case verdict.Length() == 1 && r.Find("details ul.checks li").Length() > 0:
			default:
				t.Errorf("%s: position %s shows neither a verdict with its checks nor that it is empty", sp.Site.Name, tag)
			}
		})
	}
	// The intake's temporary indoor drive stands outdoors: its verdict
	// falls short.
	doc = c.page(fmt.Sprintf("/sites/%d", places[siteIndex(t, places, "Intake")].Site.ID))
	row := doc.Find("table.verdicts tbody tr").FilterFunction(func(_ int, r *goquery.Selection) bool { return text(r.Find("th a")) == "INT-P01" })
	if got := text(row.Find("td .verdict-tag").First()); got != "Falls short" {
		t.Errorf("INT-P01 verdict %q, want Falls short", got)
	}
}

// siteIndex finds the place whose site name contains part.
func siteIndex(t *testing.T, places []store.SitePlaces, part string) int {
	t.Helper()
	i := slices.IndexFunc(places, func(p store.SitePlaces) bool { return strings.Contains(p.Site.Name, part) })
	if i < 0 {
		t.Fatalf("no site named like %q", part)
	}
	return i
}

// riskiest returns the riskiest assessed drive of the fleet.
func riskiest(t *testing.T, f *fleet) store.FleetRow {
	t.Helper()
	v, err := f.st.Fleet(context.Background(), store.FleetFilter{Status: health.StatusInstalled}, demoNow, 1, 0)
	if err != nil || len(v.Rows) != 1 {
		t.Fatalf("riskiest drive: %v, %v", v, err)
	}
	return v.Rows[0]
}

func testDrive(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	r := riskiest(t, f)
	doc := c.page(fmt.Sprintf("/drives/%d", r.DriveID))
	if !strings.Contains(text(doc.Find("h1")), r.Serial) || !strings.Contains(text(doc.Find("h1")), r.PositionTag) {
		t.Errorf("heading %q", text(doc.Find("h1")))
	}
	if got := text(doc.Find("#health .verdict .band")); got != bandLabel(r.HealthBand) {
		t.Errorf("band %q, want %s", got, bandLabel(r.HealthBand))
	}
	if doc.Find("table.life tbody tr").Length() != 2 {
		t.Error("life table lacks capacitor and fan rows")
	}
	// The derating breakdown: rated current, one row per factor, allowed.
	a, err := f.st.LatestAssessment(context.Background(), r.DriveID)
	if err != nil {
		t.Fatal(err)
	}
	if n := doc.Find("table.derating tbody tr").Length(); n != 1+4 {
		t.Errorf("derating table has %d rows, want rated + 4 factors", n)
	}
	if got := text(doc.Find("table.derating tfoot td strong")); got != trimNum(*a.AllowedCurrentA, 1)+" A" {
		t.Errorf("allowed current %q, want %.1f A", got, *a.AllowedCurrentA)
	}
	// Findings with evidence and remedy; the caution beside every remedy
	// that means physical work, and once above them all.
	arts := doc.Find("#findings article.finding")
	if int64(arts.Length()) != r.OpenFindings && r.OpenFindings > 0 && arts.Length() < int(r.OpenFindings) {
		t.Errorf("%d findings shown, %d open", arts.Length(), r.OpenFindings)
	}
	if arts.Length() == 0 {
		t.Fatal("the riskiest drive shows no finding")
	}
	physical := false
	arts.Each(func(_ int, a *goquery.Selection) {
		if a.Find("table.evidence tbody tr").Length() == 0 {
			t.Errorf("finding %q shows no evidence", text(a.Find("h3")))
		}
		if text(a.Find(".remedy p").First()) == "" {
			t.Errorf("finding %q shows no remedy", text(a.Find("h3")))
		}
		if a.Find(".remedy .caution").Length() == 1 {
			physical = true
			if !strings.Contains(text(a.Find(".remedy .caution")), "verify zero voltage on the DC bus") {
				t.Error("caution text is not the safety caution")
			}
		}
	})
	if physical && doc.Find("#findings > .caution").Length() != 1 {
		t.Error("physical work is proposed but the section shows no caution")
	}
	// A viewer is offered no action.
	if doc.Find(`form[action$="/acknowledge"]`).Length() != 0 {
		t.Error("a viewer is offered the acknowledge form")
	}
	// Four charts, each an SVG image named by its heading and summary,
	// with the values as a table.
	figs := doc.Find("#charts figure.chart")
	if figs.Length() != 4 {
		t.Fatalf("%d charts, want 4", figs.Length())
	}
	figs.Each(func(_ int, fig *goquery.Selection) {
		id := fig.AttrOr("id", "")
		svg := fig.Find("svg.plot")
		if svg.Length() != 1 || svg.AttrOr("role", "") != "img" || svg.AttrOr("aria-labelledby", "") != id+"-t "+id+"-s" {
			t.Errorf("%s: svg %d, role %q", id, svg.Length(), svg.AttrOr("role", ""))
		}
		if svg.Find("path.line").Length() == 0 {
			t.Errorf("%s: no line drawn", id)
		}
		if fig.Find("#"+id+"-s p").Length() == 0 || fig.Find("details.values table tbody tr").Length() == 0 {
			t.Errorf("%s: no text alternative", id)
		}
	})
	if !strings.Contains(text(doc.Find("#chart-life .summary")), "Capacitors:") {
		t.Error("life chart summary does not speak of the capacitors")
	}
	// The range changes the interval: 7 days hourly, 365 days in 3-day
	// steps.
	week := c.page(fmt.Sprintf("/drives/%d?range=7d", r.DriveID)).Find("#chart-temp details tbody tr").Length()
	year := c.page(fmt.Sprintf("/drives/%d?range=365d", r.DriveID)).Find("#chart-temp details tbody tr").Length()
	if week < 150 || week > 169 || year < 100 || year > 123 {
		t.Errorf("temperature table rows: %d over 7 days, %d over 365", week, year)
	}
	if res, _ := c.get(fmt.Sprintf("/drives/%d?range=2y", r.DriveID)); res.StatusCode != http.StatusBadRequest {
		t.Errorf("bad range: %d", res.StatusCode)
	}
	for _, p := range []string{"/drives/999999", "/drives/x", "/positions/999999", "/sites/999999", "/findings/999999", "/nowhere"} {
		if res, _ := c.get(p); res.StatusCode != http.StatusNotFound {
			t.Errorf("%s: %d, want 404", p, res.StatusCode)
		}
	}
	// A drive in stores: not installed, and where it is kept.
	stored, err := f.st.Fleet(context.Background(), store.FleetFilter{Status: health.StatusInStores}, demoNow, 1, 0)
	if err != nil || len(stored.Rows) == 0 {
		t.Fatalf("no stored drive: %v", err)
	}
	doc = c.page(fmt.Sprintf("/drives/%d", stored.Rows[0].DriveID))
	if !strings.Contains(text(doc.Find("#place")), "Not installed") {
		t.Errorf("stored drive's place: %q", text(doc.Find("#place")))
	}
}

func testPosition(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	r := riskiest(t, f)
	doc := c.page(fmt.Sprintf("/positions/%d", *r.PositionID))
	if !strings.Contains(text(doc.Find("h1")), r.PositionTag) {
		t.Errorf("heading %q", text(doc.Find("h1")))
	}
	stays := doc.Find("table.stays").First()
	if stays.Find("tbody tr").Length() == 0 || !strings.Contains(text(stays), r.Serial) || !strings.Contains(text(stays), "stands there now") {
		t.Errorf("position history: %q", text(stays))
	}
	if !strings.Contains(text(doc.Find("section.standing h2")), r.Serial) || doc.Find("section.standing figure.chart").Length() != 4 ||
		doc.Find("section.standing table.derating").Length() != 1 {
		t.Error("the drive standing there is not explained on the position page")
	}
	if doc.Find("dl.facts dt").FilterFunction(func(_ int, s *goquery.Selection) bool { return text(s) == "Mounting" }).Length() != 1 {
		t.Error("no mounting shown")
	}
	// A position without a drive says so.
	ctx := context.Background()
	places, _ := f.st.Places(ctx)
	empty, err := store.Create(ctx, f.st, func(v *store.Position) error {
		v.AreaID, v.Tag, v.SupplyVoltageV = places[0].Areas[0].ID, "SPARE-BAY-"+string(f.st.Dialect()), 400
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	doc = c.page(fmt.Sprintf("/positions/%d", empty.ID))
	if !strings.Contains(text(doc.Find("main")), "No drive stands in this position now") {
		t.Error("an empty position does not say it is empty")
	}
	doc = c.page(fmt.Sprintf("/sites/%d", places[0].Site.ID))
	row := doc.Find("table.verdicts tbody tr").FilterFunction(func(_ int, r *goquery.Selection) bool { return text(r.Find("th a")) == empty.Tag })
	if !strings.Contains(text(row), "No drive stands here") {
		t.Errorf("empty position on the site page: %q", text(row))
	}
}

func testFindings(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	ctx := context.Background()
	all, err := f.st.FindingsList(ctx, store.FindingsFilter{}, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	doc := c.page("/findings")
	arts := doc.Find("article.finding")
	if arts.Length() != int(min(all.Total, findingsPageSize)) {
		t.Errorf("%d findings shown, %d unresolved", arts.Length(), all.Total)
	}
	// Most severe first.
	prev := 5
	arts.Each(func(i int, a *goquery.Selection) {
		s := health.Severity(strings.ToLower(text(a.Find("h2 .sev"))))
		if s.Rank() == 0 || s.Rank() > prev {
			t.Errorf("finding %d severity %q after rank %d", i+1, s, prev)
		}
		prev = s.Rank()
		if a.Find("details table.evidence").Length() != 1 {
			t.Errorf("finding %d has no evidence table", i+1)
		}
	})
	if doc.Find(`form[action$="/acknowledge"]`).Length() != 0 {
		t.Error("a viewer is offered the acknowledge form")
	}
	if doc.Find("main > .caution").Length() != 1 {
		t.Error("the findings list proposes physical work without the caution")
	}
	for _, q := range []string{"kind=enclosure", "severity=critical", "status=acknowledged", "rule=enclosure.condensation"} {
		doc := c.page("/findings?" + q)
		key, val, _ := strings.Cut(q, "=")
		doc.Find("article.finding").Each(func(i int, a *goquery.Selection) {
			meta := text(a.Find(".meta"))
			var ok bool
			switch key {
			case "kind":
				ok = strings.Contains(meta, "· enclosure ·")
			case "severity":
				ok = strings.EqualFold(text(a.Find("h2 .sev")), val)
			case "status":
				ok = strings.Contains(meta, val)
			case "rule":
				ok = text(a.Find(".meta code")) == val
			}
			if !ok {
				t.Errorf("%s: finding %d does not match: %s", q, i+1, meta)
			}
		})
	}
	r := riskiest(t, f)
	doc = c.page(fmt.Sprintf("/findings?drive=%d", r.DriveID))
	if int64(doc.Find("article.finding").Length()) < r.OpenFindings {
		t.Errorf("drive filter shows %d findings, drive has %d open", doc.Find("article.finding").Length(), r.OpenFindings)
	}
	// The planner is offered both forms, labelled.
	p := f.signedIn(t, f.planner)
	doc = p.page("/findings")
	if doc.Find(`form[action$="/acknowledge"]`).Length() != arts.Length() || doc.Find(`form[action$="/suppress"]`).Length() != arts.Length() {
		t.Error("the planner is not offered the forms on every finding")
	}
	doc.Find("form.act input:not([type=hidden])").Each(func(_ int, in *goquery.Selection) {
		if doc.Find(`label[for="`+in.AttrOr("id", "-")+`"]`).Length() != 1 {
			t.Errorf("form field %s has no label", in.AttrOr("name", "?"))
		}
	})
}

func testSiteLimit(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.limited)
	ctx := context.Background()
	doc := c.page("/fleet")
	doc.Find("table.fleet tbody tr").Each(func(i int, r *goquery.Selection) {
		if !strings.Contains(text(r.Find("td").Eq(2)), f.limitedSite.Name) {
			t.Errorf("limited token sees row %d at %s", i+1, text(r.Find("td").Eq(2)))
		}
	})
	if n := doc.Find("#f-site option").Length(); n != 2 {
		t.Errorf("limited token offered %d site options, want all + its one", n)
	}
	if doc.Find("section.site-card").Length() > 1 {
		t.Error("limited token sees other sites")
	}
	other, err := f.st.Fleet(ctx, store.FleetFilter{}, demoNow, 200, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range other.Rows {
		if r.SiteID != f.limitedSite.ID {
			for _, p := range []string{fmt.Sprintf("/drives/%d", r.DriveID), fmt.Sprintf("/sites/%d", r.SiteID)} {
				if res, _ := c.get(p); res.StatusCode != http.StatusNotFound {
					t.Errorf("limited token: %s answers %d, want 404", p, res.StatusCode)
				}
			}
			break
		}
	}
	doc = c.page("/findings")
	doc.Find("article.finding .meta").Each(func(i int, m *goquery.Selection) {
		if !strings.Contains(text(m), f.limitedSite.Name) {
			t.Errorf("limited token sees finding %d: %s", i+1, text(m))
		}
	})
}

func testUnits(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	r := riskiest(t, f)
	path := fmt.Sprintf("/drives/%d", r.DriveID)
	doc := c.page(path)
	si := text(doc.Find("#ratings"))
	if !strings.Contains(si, "°C") || !strings.Contains(si, " kW") || strings.Contains(si, "°F") {
		t.Error("SI page does not show °C and kW")
	}
	res, _ := c.post("/settings", url.Values{"units": {"imperial"}, "back": {path}})
	if res.StatusCode != http.StatusForbidden {
		t.Errorf("settings without the form token: %d", res.StatusCode)
	}
	res, _ = c.post("/settings", url.Values{"csrf": {c.csrf}, "units": {"imperial"}, "back": {path}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != path+"?done=units" || !hasCookie(res, unitsCookie) {
		t.Fatalf("settings: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	doc = c.page(path + "?done=units")
	imp := text(doc.Find("#ratings"))
	if !strings.Contains(imp, "°F") || !strings.Contains(imp, " hp") || strings.Contains(imp, " kW") {
		t.Error("imperial page does not show °F and hp")
	}
	if doc.Find("#chart-temp svg .unit").Text() != "°F" {
		t.Error("temperature chart axis is not in °F")
	}
	if text(doc.Find("p.notice")) == "" {
		t.Error("no confirmation after saving the units")
	}
	if res, _ := c.post("/settings", url.Values{"csrf": {c.csrf}, "units": {"furlongs"}}); res.StatusCode != http.StatusUnprocessableEntity {
		t.Errorf("unknown units: %d", res.StatusCode)
	}
	// The models' own sentences follow the choice too: a finding stated
	// in °C and K reads in °F on its page and in the list.
	page, err := f.st.ListFindings(context.Background(), store.ListQuery{Filters: map[string]string{"rule": "environment.ambient_above_rating"}})
	if err != nil || len(page.Items) == 0 {
		t.Fatalf("no design-ambient finding in the demo fleet: %v", err)
	}
	fd := page.Items[0]
	if !strings.Contains(fd.Message, "°C") || !strings.Contains(fd.Message, " K ") {
		t.Fatalf("the finding's message is not in SI units: %q", fd.Message)
	}
	for _, p := range []string{fmt.Sprintf("/findings/%d", fd.ID), "/findings?rule=environment.ambient_above_rating"} {
		doc = c.page(p)
		sel := doc.Find(fmt.Sprintf("#finding-%d-h", fd.ID))
		if sel.Length() == 0 {
			sel = doc.Find("h1")
		}
		h := text(sel)
		if !strings.Contains(h, "°F") || strings.Contains(h, "°C") || strings.Contains(h, " K ") {
			t.Errorf("%s in imperial units: %q", p, h)
		}
	}
}

// testSelfContained checks that pages load nothing from the network and
// carry the security headers.
func testSelfContained(t *testing.T, f *fleet) {
	c := f.signedIn(t, f.viewer)
	r := riskiest(t, f)
	_, order := riskiestOrder(t, f)
	for _, p := range []string{"/fleet", "/sites", fmt.Sprintf("/drives/%d", r.DriveID), "/findings", "/settings", "/work-orders",
		fmt.Sprintf("/work-orders/%d", order), fmt.Sprintf("/work-orders/%d/print", order), "/forecast", "/reliability"} {
		res, doc := c.get(p)
		if csp := res.Header.Get("Content-Security-Policy"); !strings.Contains(csp, "default-src 'none'") || !strings.Contains(csp, "frame-ancestors 'none'") {
			t.Errorf("%s: CSP %q", p, csp)
		}
		if doc.Find("script").Length() != 0 {
			t.Errorf("%s carries a script", p)
		}
		doc.Find("[src], link[href]").Each(func(_ int, s *goquery.Selection) {
			u := s.AttrOr("src", s.AttrOr("href", ""))
			if !strings.HasPrefix(u, "/") || strings.HasPrefix(u, "//") {
				t.Errorf("%s loads %s", p, u)
			}
		})
		// The print view has no navigation to skip.
		print := strings.HasSuffix(p, "/print")
		if doc.Find("html[lang=en]").Length() != 1 || doc.Find("main#main").Length() != 1 || (!print && doc.Find(`a.skip[href="#main"]`).Length() != 1) {
			t.Errorf("%s lacks lang, main or the skip link", p)
		}
		if doc.Find("h1").Length() != 1 {
			t.Errorf("%s has %d h1", p, doc.Find("h1").Length())
		}
	}
	res, _ := c.get(f.h.cssPath)
	if res.StatusCode != http.StatusOK || !strings.HasPrefix(res.Header.Get("Content-Type"), "text/css") || !strings.Contains(res.Header.Get("Cache-Control"), "immutable") {
		t.Errorf("style sheet: %d %s %s", res.StatusCode, res.Header.Get("Content-Type"), res.Header.Get("Cache-Control"))
	}
}

// testNewcomer follows a newcomer: sign in with the printed token, find the
// riskiest drive on the fleet page, open it and see why it is risky, then
// follow its work order and approve it.
func testNewcomer(t *testing.T, f *fleet) {
	c := f.newClient(t)
	res, _ := c.get("/")
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("/: %d", res.StatusCode)
	}
	res, _ = c.get(res.Header.Get("Location"))
	res, doc := c.get(res.Header.Get("Location"))
	form := doc.Find(`form[action="/signin"]`)
	if res.StatusCode != http.StatusOK || form.Length() != 1 {
		t.Fatalf("the newcomer does not reach the sign-in form: %d", res.StatusCode)
	}
	res, _ = c.post("/signin", url.Values{"csrf": {form.Find(`input[name="csrf"]`).AttrOr("value", "")}, "token": {" " + f.admin + "\n"},
		"next": {form.Find(`input[name="next"]`).AttrOr("value", "")}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("sign in with the printed token: %d", res.StatusCode)
	}
	doc = c.page(res.Header.Get("Location"))
	first := doc.Find("table.fleet tbody tr").First()
	if text(first.Find("td").First()) != "1" {
		t.Fatalf("first row is rank %q", text(first.Find("td").First()))
	}
	href := first.Find("td").Eq(1).Find("a").AttrOr("href", "")
	doc = c.page(href)
	why := doc.Find("#findings article.finding").First()
	if why.Length() == 0 || text(why.Find("h3")) == "" || why.Find("table.evidence tbody tr").Length() == 0 {
		t.Fatal("the riskiest drive's page does not say why it is risky")
	}
	t.Logf("riskiest drive %s: %s", text(doc.Find("h1")), text(why.Find("h3")))
	order := doc.Find("#work table.work tbody tr th a").First()
	href = order.AttrOr("href", "")
	if href == "" {
		t.Fatal("the riskiest drive's page links no work order")
	}
	doc = c.page(href)
	approve := doc.Find(`form[action$="/approve"]`)
	if approve.Length() != 1 || text(approve.Find("button")) != "Approve this order" {
		t.Fatalf("the work order %s offers no approval", href)
	}
	res, _ = c.post(approve.AttrOr("action", ""), url.Values{"csrf": {approve.Find(`input[name="csrf"]`).AttrOr("value", "")}})
	if res.StatusCode != http.StatusSeeOther {
		t.Fatalf("approve: %d", res.StatusCode)
	}
	doc = c.page(res.Header.Get("Location"))
	var id int64
	fmt.Sscanf(href, "/work-orders/%d", &id)
	o, err := f.st.GetWorkOrder(context.Background(), id)
	if err != nil || o.Status != store.OrderApproved || !strings.Contains(text(doc.Find("p.notice")), "approved") ||
		text(doc.Find("h1 .status")) != "approved" {
		t.Errorf("after approving, order %d is %s (%v), page says %q", id, o.Status, err, text(doc.Find("p.notice")))
	}
}

// testFindingActions acknowledges and suppresses findings through the
// forms, as a planner, and checks the refusals.
func testFindingActions(t *testing.T, f *fleet) {
	ctx := context.Background()
	list, err := f.st.FindingsList(ctx, store.FindingsFilter{Status: store.FindingOpen}, 3, 0)
	if err != nil || len(list.Rows) < 3 {
		t.Fatalf("open findings: %v", err)
	}
	ack, sup, other := list.Rows[0].ID, list.Rows[1].ID, list.Rows[2].ID
	viewer := f.signedIn(t, f.viewer)
	if res, _ := viewer.post(fmt.Sprintf("/findings/%d/acknowledge", ack), url.Values{"csrf": {viewer.csrf}}); res.StatusCode != http.StatusForbidden {
		t.Errorf("viewer acknowledging: %d", res.StatusCode)
	}
	p := f.signedIn(t, f.planner)
	if res, _ := p.post(fmt.Sprintf("/findings/%d/acknowledge", ack), url.Values{"csrf": {"forged"}}); res.StatusCode != http.StatusForbidden {
		t.Errorf("acknowledging with a forged form token: %d", res.StatusCode)
	}
	// Another session's form token does not do either.
	p2 := f.signedIn(t, f.planner)
	if res, _ := p.post(fmt.Sprintf("/findings/%d/acknowledge", ack), url.Values{"csrf": {p2.csrf}}); res.StatusCode != http.StatusForbidden {
		t.Errorf("acknowledging with another session's form token: %d", res.StatusCode)
	}
	// A cross-site post is refused before the token is looked at.
	req, _ := http.NewRequest(http.MethodPost, f.srv.URL+fmt.Sprintf("/findings/%d/acknowledge", ack), strings.NewReader(url.Values{"csrf": {p.csrf}}.Encode()))
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Sec-Fetch-Site", "cross-site")
	if res, _ := p.do(req); res.StatusCode != http.StatusForbidden {
		t.Errorf("cross-site post: %d", res.StatusCode)
	}
	if got, _ := f.st.GetFinding(ctx, ack); got.Status != store.FindingOpen {
		t.Fatalf("a refused post changed the finding: %s", got.Status)
	}

	res, _ := p.post(fmt.Sprintf("/findings/%d/acknowledge", ack), url.Values{"csrf": {p.csrf}, "reason": {"on the list for the next outage"}, "back": {"/findings?kind=enclosure"}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != "/findings?done=acknowledged&kind=enclosure" {
		t.Errorf("acknowledge: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	got, err := f.st.GetFinding(ctx, ack)
	if err != nil || got.Status != store.FindingAcknowledged || got.StatusReason != "on the list for the next outage" || !strings.HasPrefix(got.AcknowledgedBy, "token:") {
		t.Errorf("acknowledged finding %+v, %v", got, err)
	}

	// Suppressing needs a reason and a date within a year; a refusal shows
	// the finding again with the reason kept.
	res, doc := p.post(fmt.Sprintf("/findings/%d/suppress", sup), url.Values{"csrf": {p.csrf}, "until": {"2027-01-15"}})
	if res.StatusCode != http.StatusUnprocessableEntity || !strings.Contains(text(doc.Find("p.error")), "reason") {
		t.Errorf("suppress without a reason: %d %q", res.StatusCode, text(doc.Find("p.error")))
	}
	res, doc = p.post(fmt.Sprintf("/findings/%d/suppress", sup), url.Values{"csrf": {p.csrf}, "reason": {"pump out of service"}, "until": {"2030-01-01"}})
	if res.StatusCode != http.StatusUnprocessableEntity || doc.Find(`input[name="reason"][value="pump out of service"]`).Length() != 1 {
		t.Errorf("suppress beyond a year: %d", res.StatusCode)
	}
	res, _ = p.post(fmt.Sprintf("/findings/%d/suppress", sup), url.Values{"csrf": {p.csrf}, "reason": {"pump out of service"}, "until": {"2027-01-15"}})
	if res.StatusCode != http.StatusSeeOther || res.Header.Get("Location") != fmt.Sprintf("/findings/%d?done=suppressed", sup) {
		t.Errorf("suppress: %d to %q", res.StatusCode, res.Header.Get("Location"))
	}
	got, err = f.st.GetFinding(ctx, sup)
	if err != nil || got.Status != store.FindingSuppressed || got.SuppressedUntil == nil || got.SuppressedUntil.Format(time.DateOnly) != "2027-01-15" {
		t.Errorf("suppressed finding %+v, %v", got, err)
	}
	doc = p.page(fmt.Sprintf("/findings/%d?done=suppressed", sup))
	if !strings.Contains(text(doc.Find("p.notice")), "suppressed") || !strings.Contains(text(doc.Find(".lede")), "suppressed until 15 Jan 2027") {
		t.Errorf("suppressed finding page: %q / %q", text(doc.Find("p.notice")), text(doc.Find(".lede")))
	}
	// A back address off the site is not followed.
	res, _ = p.post(fmt.Sprintf("/findings/%d/acknowledge", other), url.Values{"csrf": {p.csrf}, "back": {"https://elsewhere.example/"}})
	if res.Header.Get("Location") != fmt.Sprintf("/findings/%d?done=acknowledged", other) {
		t.Errorf("foreign back address led to %q", res.Header.Get("Location"))
	}
}
