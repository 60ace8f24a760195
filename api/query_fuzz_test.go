package api_test

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"net/http"
	"net/http/httptest"
	"net/url"
	"strconv"
	"strings"
	"testing"
	"time"

	"kelvard/api"
	"kelvard/store"
	"kelvard/store/storetest"
)

// fuzzAPI is a server over one store with an admin token and a drive that
// has readings, for fuzz targets that send it requests in-process.
type fuzzAPI struct {
	dialect store.Dialect
	srv     *api.Server
	admin   string
	drive   int64
	// from and to bound the stored readings.
	from, to time.Time
}

// fuzzAPIs builds a fuzzAPI on SQLite and, when PostgreSQL answers (or is
// required), on PostgreSQL: text and times that SQLite takes may be
// refused by PostgreSQL.
func fuzzAPIs(f *testing.F) []*fuzzAPI {
	f.Helper()
	dialects := []store.Dialect{store.SQLite}
	if storetest.RequirePostgres() || postgresAnswers() {
		dialects = append(dialects, store.Postgres)
	} else {
		f.Logf("PostgreSQL at %s does not answer: fuzzing on SQLite only", storetest.PostgresURL())
	}
	var out []*fuzzAPI
	for _, d := range dialects {
		st := storetest.Open(f, d)
		srv, err := api.New(api.Config{Version: "fuzz"}, st, nil)
		if err != nil {
			f.Fatal(err)
		}
		ctx := context.Background()
		_, secret, err := st.CreateToken(ctx, store.NewToken{Name: "fuzz", Role: store.RoleAdmin})
		if err != nil {
			f.Fatal(err)
		}
		fx := storetest.Build(f, st, "fuzz")
		a := &fuzzAPI{dialect: d, srv: srv, admin: secret, drive: fx.Drive.ID,
			from: time.Date(2021, 1, 1, 0, 0, 0, 0, time.UTC)}
		var rows []store.Reading
		for i := range 30 {
			v := 20 + float64(i%7)
			a.to = a.from.Add(time.Duration(i) * time.Hour)
			rows = append(rows, store.Reading{Position: fx.Position.Tag, At: a.to, AmbientC: &v})
		}
		if _, err := st.Ingest(ctx, rows, store.IngestOptions{}); err != nil {
			f.Fatal(err)
		}
		out = append(out, a)
	}
	return out
}

// postgresAnswers reports whether the test PostgreSQL server takes a
// connection within a moment.
func postgresAnswers() bool {
	db, err := sql.Open("pgx", storetest.PostgresURL())
	if err != nil {
		return false
	}
	defer db.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	return db.PingContext(ctx) == nil
}

// get sends GET path?rawQuery in-process and returns the answer.
func (a *fuzzAPI) get(path, rawQuery string) answer {
	req := httptest.NewRequest(http.MethodGet, "/", nil)
	req.URL = &url.URL{Path: path, RawQuery: rawQuery}
	req.RequestURI = req.URL.RequestURI()
	req.Header.Set("Authorization", "Bearer "+a.admin)
	rec := httptest.NewRecorder()
	a.srv.ServeHTTP(rec, req)
	return answer{status: rec.Code, header: rec.Header(), body: rec.Body.Bytes()}
}

// checkQueryAnswer holds what every answer to a query must satisfy: a
// success, or a client error as a problem that says what is wrong; never
// a server error.
func checkQueryAnswer(t *testing.T, d store.Dialect, path, query string, a answer) {
	t.Helper()
	switch a.status {
	case http.StatusOK:
		return
	case http.StatusBadRequest, http.StatusNotFound, http.StatusUnprocessableEntity:
	default:
		t.Fatalf("%s: GET %s?%s answered %d: %s", d, path, query, a.status, a.body)
	}
	var p api.Problem
	if err := json.Unmarshal(a.body, &p); err != nil || p.Status != a.status || a.header.Get("Content-Type") != "application/problem+json" {
		t.Fatalf("%s: GET %s?%s answered %d with no problem body: %s", d, path, query, a.status, a.body)
	}
	if a.status != http.StatusNotFound && len(p.Errors) == 0 {
		t.Fatalf("%s: GET %s?%s answered %d naming no field: %s", d, path, query, a.status, a.body)
	}
	for _, e := range p.Errors {
		if e.Field == "" || e.Reason == "" {
			t.Fatalf("%s: GET %s?%s: field error %+v", d, path, query, e)
		}
	}
}

// FuzzParseTime: ParseTime accepts what time.Parse with RFC 3339 accepts
// when it falls in the years 0001 to 9999 in UTC, answers in UTC, and what
// it answers formats and parses back to the same instant.
func FuzzParseTime(f *testing.F) {
	for _, s := range []string{"2026-01-31T00:00:00Z", "2026-01-31T08:00:00.123456789+05:30", "0000-01-01T00:00:00Z",
		"9999-12-31T23:59:59.999999999-23:59", "2026-02-30T00:00:00Z", "2026-01-31 00:00:00Z", "2026-01-31T24:00:00Z",
		"2026-01-31T00:00:00z", "2026-01-31T00:00:60Z", "2026-01-31", "", "T", "2026-01-31T00:00:00+24:00"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := api.ParseTime(s)
		want, werr := time.Parse(time.RFC3339Nano, s)
		if y := want.UTC().Year(); werr == nil && (y < 1 || y > 9999) {
			werr = errors.New("outside the years 0001 to 9999")
		}
		if (err == nil) != (werr == nil) {
			t.Fatalf("ParseTime(%q): %v; time.Parse: %v", s, err, werr)
		}
		if err != nil {
			return
		}
		if got.Location() != time.UTC || !got.Equal(want) {
			t.Fatalf("ParseTime(%q) = %v, want %v in UTC", s, got, want)
		}
		again, err := api.ParseTime(got.Format(time.RFC3339Nano))
		if err != nil || !again.Equal(got) {
			t.Fatalf("ParseTime(%q) = %v does not round-trip: %v %v", s, got, again, err)
		}
	})
}

// timeRangeEndpoints are the endpoints that take from and to.
func timeRangeEndpoints(drive int64) []string {
	id := "/api/v1/drives/" + strconv.FormatInt(drive, 10)
	return []string{id + "/readings", id + "/health/history", "/api/v1/audit"}
}

// FuzzTimeRangeQuery sends fuzzed query strings to the endpoints that take
// a time range (from, to) and paging (limit, cursor). No query makes a
// server error; a readings page lies within the range asked for, and its
// next cursor leads to the next page.
func FuzzTimeRangeQuery(f *testing.F) {
	for _, q := range []string{"", "from=2021-01-01T05:00:00Z&to=2021-01-01T10:00:00Z", "from=2021-01-01T05:00:00.5%2B01:00&limit=3",
		"to=2021-01-01T00:00:00Z&from=2021-01-02T00:00:00Z", "from=0000-01-01T00:00:00Z&to=9999-12-31T23:59:59.999999999Z",
		"from=yesterday", "limit=0", "limit=10001", "limit=2&cursor=eyJ0IjoxNjA5NDcwODAwMDAwMDAwfQ", "cursor=eyJ0Ijo5MjIzMzcyMDM2ODU0Nzc1ODA3fQ",
		"cursor=eyJ0IjotOTIyMzM3MjAzNjg1NDc3NTgwOH0", "cursor=%%", "cursor=e30", "from=a&from=b", "actor=%00&resource=x", "bogus=1"} {
		for i := range 3 {
			f.Add(uint8(i), q)
		}
	}
	apis := fuzzAPIs(f)
	f.Fuzz(func(t *testing.T, which uint8, query string) {
		for _, a := range apis {
			eps := timeRangeEndpoints(a.drive)
			path := eps[int(which)%len(eps)]
			ans := a.get(path, query)
			checkQueryAnswer(t, a.dialect, path, query, ans)
			if ans.status != http.StatusOK || !strings.HasSuffix(path, "/readings") {
				continue
			}
			var page store.Page[store.Reading]
			if err := json.Unmarshal(ans.body, &page); err != nil {
				t.Fatalf("%s: readings page: %v", a.dialect, err)
			}
			vals, _ := url.ParseQuery(query)
			from, ferr := api.ParseTime(vals.Get("from"))
			to, terr := api.ParseTime(vals.Get("to"))
			for _, r := range page.Items {
				if (ferr == nil && r.At.Before(from)) || (terr == nil && !r.At.Before(to)) {
					t.Fatalf("%s: reading at %v outside [%v, %v) for %q", a.dialect, r.At, from, to, query)
				}
			}
			if page.Next != "" {
				vals.Set("cursor", page.Next)
				next := a.get(path, vals.Encode())
				if next.status != http.StatusOK {
					t.Fatalf("%s: the next page of %q answered %d: %s", a.dialect, query, next.status, next.body)
				}
			}
		}
	})
}

// listEndpoints are collection lists whose filters, limit and cursor are
// read by listQueryFrom and checked by the store's filter validation.
func listEndpoints(drive int64) []string {
	id := "/api/v1/drives/" + strconv.FormatInt(drive, 10)
	return []string{"/api/v1/sites", "/api/v1/areas", "/api/v1/drive-models", "/api/v1/positions", "/api/v1/drives",
		"/api/v1/events", "/api/v1/findings", id + "/components", id + "/installations"}
}

// FuzzListQuery sends fuzzed query strings to every collection list: no
// query makes a server error, a page holds at most limit items, and its
// next cursor leads to the next page.
func FuzzListQuery(f *testing.F) {
	for _, q := range []string{"", "limit=1", "limit=1000", "limit=1001", "limit=-1", "limit=1&cursor=eyJhIjoxfQ", "cursor=eyJhIjotMX0",
		"cursor=eyJhIjo5MjIzMzcyMDM2ODU0Nzc1ODA3fQ", "cursor=bm90IGpzb24", "name=Works%20fuzz", "name=%00", "name=%ff", "status=installed",
		"status=nonsense", "site_id=1", "site_id=0", "site_id=99999999999999999999", "from=2021-01-01T00:00:00Z", "to=nope",
		"from=0000-01-01T00:00:00%2B01:00&to=9999-12-31T23:59:59.999999999-23:59",
		"severity=critical&kind=enclosure", "serial=SN-fuzz&model_id=1", "a=1", "limit=1&limit=2", "%zz"} {
		for i := range 9 {
			f.Add(uint8(i), q)
		}
	}
	apis := fuzzAPIs(f)
	f.Fuzz(func(t *testing.T, which uint8, query string) {
		for _, a := range apis {
			eps := listEndpoints(a.drive)
			path := eps[int(which)%len(eps)]
			ans := a.get(path, query)
			checkQueryAnswer(t, a.dialect, path, query, ans)
			if ans.status != http.StatusOK {
				continue
			}
			var page struct {
				Items []json.RawMessage `json:"items"`
				Next  string            `json:"next_cursor"`
			}
			if err := json.Unmarshal(ans.body, &page); err != nil {
				t.Fatalf("%s: %s page: %v: %s", a.dialect, path, err, ans.body)
			}
			vals, _ := url.ParseQuery(query)
			limit := store.DefaultLimit
			if v := vals.Get("limit"); v != "" {
				n, err := strconv.Atoi(v)
				if err != nil {
					t.Fatalf("%s: %q accepted with limit %q", a.dialect, query, v)
				}
				limit = n
			}
			if len(page.Items) > limit {
				t.Fatalf("%s: %s?%s gave %d items, limit %d", a.dialect, path, query, len(page.Items), limit)
			}
			if page.Next != "" {
				vals.Set("cursor", page.Next)
				if next := a.get(path, vals.Encode()); next.status != http.StatusOK {
					t.Fatalf("%s: the next page of %s?%s answered %d: %s", a.dialect, path, query, next.status, next.body)
				}
			}
		}
	})
}
