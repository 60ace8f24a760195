package api_test

import (
	"io"
	"net/http"
	"net/http/httptest"
	"slices"
	"strconv"
	"strings"
	"testing"

	"kelvard/api"
	"kelvard/store"
	"kelvard/store/csvio"
	"kelvard/store/storetest"
)

// sendCSV posts or gets with a text body of the given media type.
func (h *harness) sendCSV(method, path, token, ctype, body string) answer {
	h.t.Helper()
	return sendTo(h.t, h.http.URL, method, path, token, ctype, body)
}

func sendTo(t *testing.T, base, method, path, token, ctype, body string) answer {
	t.Helper()
	var r io.Reader
	if body != "" {
		r = strings.NewReader(body)
	}
	req, err := http.NewRequest(method, base+path, r)
	if err != nil {
		t.Fatal(err)
	}
	if ctype != "" {
		req.Header.Set("Content-Type", ctype)
	}
	req.Header.Set("Authorization", "Bearer "+token)
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	data, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return answer{status: resp.StatusCode, header: resp.Header, body: data}
}

const sitesCSV = "name,elevation_m,ambient_min_c,ambient_max_c\nHill Works,900,-2,38\nRiver Intake,12,4,41\n"

func TestCSVImportAndExport(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		planner := h.token(store.RolePlanner, nil)
		viewer := h.token(store.RoleViewer, nil)

		a := h.sendCSV(http.MethodPost, "/api/v1/import/sites", planner, "text/csv; charset=utf-8", sitesCSV)
		if a.status != http.StatusOK {
			t.Fatalf("import: %d %s", a.status, a.body)
		}
		var res csvio.Result
		a.json(t, &res)
		if res.Kind != csvio.KindSites || res.Rows != 2 || res.Created != 2 || res.Rejected != 0 {
			t.Errorf("import result %+v", res)
		}
		a = h.sendCSV(http.MethodGet, "/api/v1/export/sites", viewer, "", "")
		if a.status != http.StatusOK || !strings.HasPrefix(a.header.Get("Content-Type"), "text/csv") {
			t.Fatalf("export: %d %s %s", a.status, a.header.Get("Content-Type"), a.body)
		}
		want := "name,elevation_m,time_zone,ambient_min_c,ambient_max_c,parameters,notes\nHill Works,900,UTC,-2,38,,\nRiver Intake,12,UTC,4,41,,\n"
		if string(a.body) != want {
			t.Errorf("export body:\n%s\nwant:\n%s", a.body, want)
		}
		if !strings.Contains(a.header.Get("Content-Disposition"), `filename="sites.csv"`) {
			t.Errorf("Content-Disposition %q", a.header.Get("Content-Disposition"))
		}
		// Importing the export again changes nothing.
		a = h.sendCSV(http.MethodPost, "/api/v1/import/sites", planner, "text/csv", string(a.body))
		a.json(t, &res)
		if a.status != http.StatusOK || res.Unchanged != 2 {
			t.Errorf("re-import: %d %+v", a.status, res)
		}

		// A file with bad rows: 422 naming each, nothing written.
		bad := "site,name,environment.water\nHill Works,Dosing room,firehose\nNowhere,Deck,none\nHill Works,Pump hall,none\n"
		a = h.sendCSV(http.MethodPost, "/api/v1/import/areas", planner, "text/csv", bad)
		if a.status != http.StatusUnprocessableEntity {
			t.Fatalf("bad rows: %d %s", a.status, a.body)
		}
		p := a.problem(t)
		var got []string
		for _, e := range p.Errors {
			got = append(got, strconv.Itoa(e.Line)+":"+e.Field)
		}
		if !slices.Equal(got, []string{"2:environment.water", "3:site"}) {
			t.Errorf("422 names %v: %s", got, a.body)
		}
		a = h.sendCSV(http.MethodGet, "/api/v1/export/areas", viewer, "", "")
		if strings.Count(string(a.body), "\n") != 1 {
			t.Errorf("areas after a failed import:\n%s", a.body)
		}

		// Partial: the good row is written, the bad ones listed.
		a = h.sendCSV(http.MethodPost, "/api/v1/import/areas?partial=true", planner, "text/csv", bad)
		a.json(t, &res)
		if a.status != http.StatusOK || res.Created != 1 || res.Rejected != 2 || len(res.Errors) != 2 || !res.Partial {
			t.Errorf("partial import: %d %s", a.status, a.body)
		}

		// Unknown kinds, bad options and media types.
		for _, c := range []struct {
			method, path, ctype string
			want                int
		}{
			{http.MethodPost, "/api/v1/import/pumps", "text/csv", http.StatusNotFound},
			{http.MethodGet, "/api/v1/export/pumps", "", http.StatusNotFound},
			{http.MethodPost, "/api/v1/import/sites?partial=maybe", "text/csv", http.StatusBadRequest},
			{http.MethodPost, "/api/v1/import/sites?dry=true", "text/csv", http.StatusBadRequest},
			{http.MethodPost, "/api/v1/import/sites", "application/json", http.StatusUnsupportedMediaType},
			{http.MethodPost, "/api/v1/import/sites", "text/csv; charset=latin1", http.StatusUnsupportedMediaType},
			{http.MethodPost, "/api/v1/import/readings", "text/csv", http.StatusUnprocessableEntity}, // a sites file is not readings
			{http.MethodGet, "/api/v1/export/readings", "", http.StatusNotImplemented},
		} {
			a := h.sendCSV(c.method, c.path, planner, c.ctype, sitesCSV)
			if a.status != c.want {
				t.Errorf("%s %s (%s): %d, want %d: %s", c.method, c.path, c.ctype, a.status, c.want, a.body)
			}
			if a.status >= 400 {
				a.problem(t)
			}
		}

		// Roles: viewers export but do not import; no token, no answer.
		if a := h.sendCSV(http.MethodPost, "/api/v1/import/sites", viewer, "text/csv", sitesCSV); a.status != http.StatusForbidden {
			t.Errorf("viewer import: %d", a.status)
		}
		if a := h.sendCSV(http.MethodGet, "/api/v1/export/sites", "", "", ""); a.status != http.StatusUnauthorized {
			t.Errorf("export without a token: %d", a.status)
		}
	})
}

// TestCSVSiteLimit: a token limited to one site exports only that site and
// cannot import into another.
func TestCSVSiteLimit(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		a := h.buildFleet("a")
		h.buildFleet("b")
		limited := h.token(store.RolePlanner, []int64{a.site})
		ans := h.sendCSV(http.MethodGet, "/api/v1/export/drives", limited, "", "")
		if ans.status != http.StatusOK || !strings.Contains(string(ans.body), "S-a,") || strings.Contains(string(ans.body), "S-b,") {
			t.Errorf("limited export of drives: %d\n%s", ans.status, ans.body)
		}
		ans = h.sendCSV(http.MethodPost, "/api/v1/import/areas", limited, "text/csv", "site,name\nWorks b,Sneaky\n")
		if ans.status != http.StatusUnprocessableEntity || !fieldsOf(ans.problem(t)).has("site") {
			t.Errorf("import into another site: %d %s", ans.status, ans.body)
		}
	})
}

// TestCSVBodyLimit: an import larger than the configured limit is refused
// with 413 and writes nothing.
func TestCSVBodyLimit(t *testing.T) {
	t.Parallel()
	st := storetest.Open(t, store.SQLite)
	srv, err := api.New(api.Config{Version: "test", MaxImportBytes: 64}, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	hs := httptest.NewServer(srv)
	t.Cleanup(hs.Close)
	_, secret, err := st.CreateToken(t.Context(), store.NewToken{Name: "p", Role: store.RolePlanner})
	if err != nil {
		t.Fatal(err)
	}
	big := "name,ambient_min_c,ambient_max_c\n" + strings.Repeat("Works,0,30\n", 20)
	if a := sendTo(t, hs.URL, http.MethodPost, "/api/v1/import/sites", secret, "text/csv", big); a.status != http.StatusRequestEntityTooLarge {
		t.Errorf("oversized import: %d %s", a.status, a.body)
	}
	page, err := store.List[store.Site](t.Context(), st, store.ListQuery{})
	if err != nil || len(page.Items) != 0 {
		t.Errorf("%d sites after an oversized import, %v", len(page.Items), err)
	}
}
