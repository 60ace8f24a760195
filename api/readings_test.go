package api_test

import (
	"bytes"
	"fmt"
	"io"
	"net/http"
	"net/http/httptest"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"

	"kelvard/api"
	"kelvard/store"
	"kelvard/store/storetest"
)

// newHarnessWith is newHarness with a chosen configuration.
func newConfiguredHarness(t *testing.T, d store.Dialect, cfg api.Config) *harness {
	t.Helper()
	st := storetest.Open(t, d)
	srv, err := api.New(cfg, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	h := &harness{t: t, store: st, srv: srv, http: httptest.NewServer(srv)}
	t.Cleanup(h.http.Close)
	h.admin = h.token(store.RoleAdmin, nil)
	return h
}

// send posts a body with a media type and extra headers.
func (h *harness) send(method, path, token, ctype string, body []byte, headers ...string) answer {
	h.t.Helper()
	req, err := http.NewRequest(method, h.http.URL+path, bytes.NewReader(body))
	if err != nil {
		h.t.Fatal(err)
	}
	if ctype != "" {
		req.Header.Set("Content-Type", ctype)
	}
	req.Header.Set("Authorization", "Bearer "+token)
	for i := 0; i+1 < len(headers); i += 2 {
		req.Header.Add(headers[i], headers[i+1])
	}
	resp, err := h.http.Client().Do(req)
	if err != nil {
		h.t.Fatal(err)
	}
	defer resp.Body.Close()
	data, err := io.ReadAll(resp.Body)
	if err != nil {
		h.t.Fatal(err)
	}
	return answer{status: resp.StatusCode, header: resp.Header, body: data}
}

// ingestAnswer decodes a 200 answer of a readings post.
func ingestAnswer(t *testing.T, a answer) store.IngestResult {
	t.Helper()
	if a.status != http.StatusOK {
		t.Fatalf("status %d, want 200: %s", a.status, a.body)
	}
	var res store.IngestResult
	a.json(t, &res)
	return res
}

// readingsCSV writes rows of the fleet's position as CSV with cols.
func readingsCSV(t *testing.T, cols []string, rows []store.Reading) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := store.WriteReadingsCSV(&b, rows, cols); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func ptr(v float64) *float64 { return &v }

// threeReadings are readings of position tag from 2024-05-01.
func threeReadings(tag string) []store.Reading {
	start := time.Date(2024, 5, 1, 0, 0, 0, 0, time.UTC)
	var out []store.Reading
	for i := range 3 {
		out = append(out, store.Reading{Position: tag, At: start.Add(time.Duration(i) * time.Hour),
			AmbientC: ptr(21.5 + float64(i)), CurrentA: ptr(18.25), BusV: ptr(677), CapacitanceUF: nil})
	}
	return out
}

const jsonThree = `[
  {"position": "%[1]s", "at": "2024-05-01T00:00:00Z", "ambient_c": 21.5, "current_a": 18.25, "bus_v": 677},
  {"position": "%[1]s", "at": "2024-05-01T01:00:00Z", "ambient_c": 22.5, "current_a": 18.25, "bus_v": 677, "capacitance_uf": null},
  {"position": "%[1]s", "at": "2024-05-01T02:00:00Z", "ambient_c": 23.5, "current_a": 18.25, "bus_v": 677}
]`

func TestPostReadingsJSONAndCSV(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		a, b := h.buildFleet("a"), h.buildFleet("b")
		ingest := h.token(store.RoleIngest, nil)
		body := []byte(fmt.Sprintf(jsonThree, "DP-a"))
		res := ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", body))
		if res.Inserted != 3 || res.AlreadyPresent != 0 || len(res.Conflicts) != 0 || len(res.Rejected) != 0 {
			t.Fatalf("first post %+v", res)
		}
		// Replay: nothing stored twice.
		res = ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", body))
		if res.Inserted != 0 || res.AlreadyPresent != 3 {
			t.Fatalf("replay %+v", res)
		}
		// The same readings as CSV to the position's own endpoint, without
		// a position column, are the same rows.
		csvBody := readingsCSV(t, append([]string{"at"}, store.ReadingValueColumns()...), threeReadings(""))
		res = ingestAnswer(t, h.send(http.MethodPost, fmt.Sprintf("/api/v1/positions/%d/readings", a.position), ingest, "text/csv; charset=utf-8", csvBody))
		if res.Inserted != 0 || res.AlreadyPresent != 3 {
			t.Fatalf("CSV of the same readings %+v", res)
		}
		// CSV to the second fleet, then compare what each drive holds.
		csvBody = readingsCSV(t, store.ReadingInputColumns(), threeReadings("DP-b"))
		if res := ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", ingest, "text/csv", csvBody)); res.Inserted != 3 {
			t.Fatalf("CSV post %+v", res)
		}
		read := func(drive int64) []store.Reading {
			var page store.Page[store.Reading]
			h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d/readings", drive), h.admin, nil).json(t, &page)
			return page.Items
		}
		fromJSON, fromCSV := read(a.drive), read(b.drive)
		if len(fromJSON) != 3 || fromJSON[0].DriveID != a.drive || fromJSON[0].PositionID != a.position || fromJSON[0].Position != "DP-a" {
			t.Fatalf("read back %+v", fromJSON)
		}
		for i := range fromJSON {
			x, y := fromJSON[i], fromCSV[i]
			x.DriveID, x.PositionID, x.Position = 0, 0, ""
			y.DriveID, y.PositionID, y.Position = 0, 0, ""
			if !reflect.DeepEqual(x, y) {
				t.Errorf("row %d: JSON gave %+v, CSV gave %+v", i+1, x, y)
			}
		}
		// Read back as CSV.
		req, _ := http.NewRequest(http.MethodGet, h.http.URL+fmt.Sprintf("/api/v1/drives/%d/readings", a.drive), nil)
		req.Header.Set("Authorization", "Bearer "+h.admin)
		req.Header.Set("Accept", "text/csv")
		resp, err := h.http.Client().Do(req)
		if err != nil {
			t.Fatal(err)
		}
		data, _ := io.ReadAll(resp.Body)
		resp.Body.Close()
		if !strings.HasPrefix(resp.Header.Get("Content-Type"), "text/csv") {
			t.Fatalf("CSV read-back has Content-Type %q", resp.Header.Get("Content-Type"))
		}
		lines := strings.Split(strings.TrimSpace(string(data)), "\n")
		if len(lines) != 4 || lines[0] != strings.Join(store.ReadingOutputColumns(), ",") ||
			!strings.HasPrefix(lines[1], fmt.Sprintf("%d,%d,DP-a,2024-05-01T00:00:00Z,,21.5,,18.25,,,677,", a.drive, a.position)) {
			t.Errorf("CSV read-back:\n%s", data)
		}
	})
}

func TestPostReadingsRefusals(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		ingest := h.token(store.RoleIngest, nil)
		post := func(path, ctype, body string) answer {
			return h.send(http.MethodPost, path, ingest, ctype, []byte(body))
		}
		for _, c := range []struct {
			name, path, ctype, body string
			status                  int
			field                   string
		}{
			{"unknown CSV column", "/api/v1/readings", "text/csv", "position,at,ambient_f\nDP-a,2024-05-01T00:00:00Z,70\n", 400, "ambient_f"},
			{"unknown JSON key", "/api/v1/readings", "application/json", `[{"position":"DP-a","at":"2024-05-01T00:00:00Z","temp":1}]`, 400, "temp"},
			{"malformed JSON", "/api/v1/readings", "application/json", `[{"position":"DP-a",}]`, 400, "body"},
			{"not an array", "/api/v1/readings", "application/json", `{}`, 400, "body"},
			{"unknown parameter", "/api/v1/readings?parital=true", "application/json", `[]`, 400, "parital"},
			{"bad partial", "/api/v1/readings?partial=maybe", "application/json", `[]`, 400, "partial"},
			{"media type", "/api/v1/readings", "application/xml", `<r/>`, 415, ""},
			{"unknown position id", "/api/v1/positions/999/readings", "application/json", `[{"at":"2024-05-01T00:00:00Z"}]`, 404, ""},
		} {
			a := post(c.path, c.ctype, c.body)
			if a.status != c.status {
				t.Errorf("%s: %d, want %d: %s", c.name, a.status, c.status, a.body)
				continue
			}
			if p := a.problem(t); c.field != "" && !fieldsOf(p).has(c.field) {
				t.Errorf("%s: problem %+v does not name %s", c.name, p, c.field)
			}
		}

		// A batch with bad rows: 422 naming each row and line, nothing
		// stored; partial stores the rest.
		body := "position,at,ambient_c,current_a\n" +
			"DP-a,2024-05-01T00:00:00Z,21,10\n" +
			"DP-a,2024-05-01T01:00:00Z,212,10\n" +
			"DP-X,2024-05-01T02:00:00Z,21,10\n" +
			"DP-a,2024-05-01T03:00:00Z,21,abc\n" +
			"DP-a,2020-05-01T03:00:00Z,21,10\n" +
			"DP-a,2024-05-01T04:00:00Z,21,241\n" +
			"DP-a,2024-05-01T05:00:00Z,21,10\n"
		a := post("/api/v1/readings", "text/csv", body)
		if a.status != http.StatusUnprocessableEntity {
			t.Fatalf("atomic batch with bad rows: %d %s", a.status, a.body)
		}
		p := a.problem(t)
		var got []string
		for _, e := range p.Errors {
			got = append(got, fmt.Sprintf("%d/%d:%s", e.Row, e.Line, e.Field))
		}
		want := []string{"2/3:ambient_c", "3/4:position", "4/5:current_a", "5/6:at", "6/7:current_a"}
		if !slices.Equal(got, want) {
			t.Errorf("422 names %v, want %v\n%s", got, want, a.body)
		}
		var page store.Page[store.Reading]
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d/readings", f.drive), h.admin, nil).json(t, &page)
		if len(page.Items) != 0 {
			t.Fatalf("a refused batch stored %d readings", len(page.Items))
		}
		res := ingestAnswer(t, post("/api/v1/readings?partial=true", "text/csv", body))
		got = got[:0]
		for _, e := range res.Rejected {
			got = append(got, fmt.Sprintf("%d/%d:%s", e.Row, e.Line, e.Field))
		}
		if res.Inserted != 2 || !slices.Equal(got, want) {
			t.Errorf("partial batch %+v", res)
		}

		// A conflicting reading is reported and the stored one kept.
		conflict := `[{"position":"DP-a","at":"2024-05-01T00:00:00Z","ambient_c":25,"current_a":10}]`
		res = ingestAnswer(t, post("/api/v1/readings", "application/json", conflict))
		if res.Inserted != 0 || len(res.Conflicts) != 1 || res.Conflicts[0].DriveID != f.drive || !slices.Equal(res.Conflicts[0].Fields, []string{"ambient_c"}) {
			t.Errorf("conflict %+v", res)
		}

		// Through the position endpoint a row must not name another
		// position.
		a = post(fmt.Sprintf("/api/v1/positions/%d/readings", f.position), "application/json", `[{"position":"DP-b","at":"2024-05-01T00:00:00Z"}]`)
		if a.status != http.StatusUnprocessableEntity || !fieldsOf(a.problem(t)).has("position") {
			t.Errorf("row naming another position: %d %s", a.status, a.body)
		}
		// A token limited to another site does not see the position.
		other := h.buildFleet("b")
		limited := h.token(store.RoleIngest, []int64{other.site})
		a = h.send(http.MethodPost, "/api/v1/readings", limited, "application/json", []byte(`[{"position":"DP-a","at":"2024-05-01T07:00:00Z"}]`))
		if a.status != http.StatusUnprocessableEntity {
			t.Fatalf("position outside the token's sites: %d %s", a.status, a.body)
		}
		if p := a.problem(t); len(p.Errors) != 1 || p.Errors[0].Field != "position" || !strings.Contains(p.Errors[0].Reason, `"DP-a"`) {
			t.Errorf("position outside the token's sites: %+v", p.Errors)
		}
		// A viewer may read but not post.
		viewer := h.token(store.RoleViewer, nil)
		if a := h.send(http.MethodPost, "/api/v1/readings", viewer, "application/json", []byte(`[]`)); a.status != http.StatusForbidden {
			t.Errorf("viewer post: %d", a.status)
		}
	})
}

func TestIngestLimits(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			h := newConfiguredHarness(t, d, api.Config{Version: "test", MaxIngestBytes: 2000, MaxIngestRows: 5})
			h.buildFleet("a")
			ingest := h.token(store.RoleIngest, nil)
			rows := func(n int) []byte {
				var b strings.Builder
				b.WriteString("position,at\n")
				for i := range n {
					fmt.Fprintf(&b, "DP-a,2024-05-01T%02d:00:00Z\n", i)
				}
				return []byte(b.String())
			}
			if res := ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", ingest, "text/csv", rows(5))); res.Inserted != 5 {
				t.Errorf("five rows at a limit of five: %+v", res)
			}
			for _, c := range []struct {
				name string
				body []byte
				want string
			}{
				{"six rows", rows(6), "5 readings"},
				{"too many bytes", []byte(`[` + strings.Repeat(`{}, `, 600) + `{}]`), "2000 bytes"},
			} {
				a := h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", c.body)
				if c.name == "six rows" {
					a = h.send(http.MethodPost, "/api/v1/readings", ingest, "text/csv", c.body)
				}
				if a.status != http.StatusRequestEntityTooLarge {
					t.Errorf("%s: %d, want 413: %s", c.name, a.status, a.body)
					continue
				}
				if p := a.problem(t); !strings.Contains(p.Detail, c.want) {
					t.Errorf("%s: detail %q does not say %q", c.name, p.Detail, c.want)
				}
			}
			// A body without Content-Length is cut off at the limit too.
			req, _ := http.NewRequest(http.MethodPost, h.http.URL+"/api/v1/readings", io.MultiReader(strings.NewReader("["), strings.NewReader(strings.Repeat(" ", 5000)+"]")))
			req.Header.Set("Content-Type", "application/json")
			req.Header.Set("Authorization", "Bearer "+ingest)
			resp, err := h.http.Client().Do(req)
			if err != nil {
				t.Fatal(err)
			}
			resp.Body.Close()
			if resp.StatusCode != http.StatusRequestEntityTooLarge {
				t.Errorf("streamed body over the limit: %d", resp.StatusCode)
			}
		})
	}
}

func TestIdempotencyKeyHeader(t *testing.T) {
	t.Parallel()
	for _, d := range storetest.Dialects {
		t.Run(string(d), func(t *testing.T) {
			t.Parallel()
			reg := prometheus.NewRegistry()
			h := newConfiguredHarness(t, d, api.Config{Version: "test", Registry: reg})
			f := h.buildFleet("a")
			ingest, other := h.token(store.RoleIngest, nil), h.token(store.RoleIngest, nil)
			body := []byte(fmt.Sprintf(jsonThree, "DP-a"))
			key := `"8e03978e-40d5-43e8-bc93-6894a57f9324"`
			first := h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", body, "Idempotency-Key", key)
			if res := ingestAnswer(t, first); res.Inserted != 3 || first.header.Get("Kelvard-Idempotent-Replay") != "" {
				t.Fatalf("first post %+v %v", res, first.header)
			}
			again := h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", body, "Idempotency-Key", key)
			if again.status != http.StatusOK || !bytes.Equal(again.body, first.body) || again.header.Get("Kelvard-Idempotent-Replay") != "true" {
				t.Errorf("replay: %d %s %v, want the first answer again", again.status, again.body, again.header)
			}
			// The key with another body is a different request.
			changed := bytes.Replace(body, []byte("21.5"), []byte("21.6"), 1)
			if a := h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", changed, "Idempotency-Key", key); a.status != http.StatusUnprocessableEntity {
				t.Errorf("same key, other body: %d, want 422: %s", a.status, a.body)
			} else if p := a.problem(t); !strings.Contains(p.Detail, "Idempotency-Key") {
				t.Errorf("422 detail %q", p.Detail)
			}
			// So is the same body to another endpoint.
			if a := h.send(http.MethodPost, fmt.Sprintf("/api/v1/positions/%d/readings", f.position), ingest, "application/json", body, "Idempotency-Key", key); a.status != http.StatusUnprocessableEntity {
				t.Errorf("same key, other endpoint: %d, want 422", a.status)
			}
			// Keys belong to their token.
			if res := ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", other, "application/json", body, "Idempotency-Key", key)); res.AlreadyPresent != 3 {
				t.Errorf("another token's key: %+v", res)
			}
			// A refused request frees its key for the corrected one.
			bad := []byte(`[{"position":"DP-a","at":"2024-05-01T05:00:00Z","ambient_c":500}]`)
			if a := h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", bad, "Idempotency-Key", "k2"); a.status != http.StatusUnprocessableEntity {
				t.Fatalf("bad batch: %d", a.status)
			}
			good := []byte(`[{"position":"DP-a","at":"2024-05-01T05:00:00Z","ambient_c":50}]`)
			if res := ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", good, "Idempotency-Key", "k2")); res.Inserted != 1 {
				t.Errorf("corrected batch with the same key: %+v", res)
			}
			for _, bad := range []string{`""`, `"unterminated`, "caf\u00e9", strings.Repeat("k", 256)} {
				if a := h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", good, "Idempotency-Key", bad); a.status != http.StatusBadRequest {
					t.Errorf("key %q: %d, want 400", bad, a.status)
				}
			}
			// The counters count each reading once, replays excluded.
			conflict := []byte(`[{"position":"DP-a","at":"2024-05-01T05:00:00Z","ambient_c":51}]`)
			ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", ingest, "application/json", conflict))
			values := map[string]float64{}
			families, err := reg.Gather()
			if err != nil {
				t.Fatal(err)
			}
			for _, mf := range families {
				if !strings.HasPrefix(mf.GetName(), "kelvard_readings_") {
					continue // the registry also serves the fleet and Go metrics
				}
				for _, m := range mf.GetMetric() {
					name := mf.GetName()
					for _, l := range m.GetLabel() {
						name += "/" + l.GetValue()
					}
					values[name] = m.GetCounter().GetValue()
				}
			}
			want := map[string]float64{"kelvard_readings_ingested_total": 4, "kelvard_readings_rejected_total/invalid": 1,
				"kelvard_readings_rejected_total/conflict": 1}
			if !reflect.DeepEqual(values, want) {
				t.Errorf("counters %v, want %v", values, want)
			}
			if got := h.srv.IngestMetrics(); got == nil || got.Ingested == nil {
				t.Error("IngestMetrics is not exposed")
			}
		})
	}
}

func TestGetReadingsPages(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		var rows []store.Reading
		start := time.Date(2024, 5, 1, 0, 0, 0, 0, time.UTC)
		for i := range 25 {
			rows = append(rows, store.Reading{Position: "DP-a", At: start.Add(time.Duration(i) * time.Minute), BusV: ptr(600 + float64(i))})
		}
		if res := ingestAnswer(t, h.send(http.MethodPost, "/api/v1/readings", h.admin, "text/csv", readingsCSV(t, []string{"position", "at", "bus_v"}, rows))); res.Inserted != 25 {
			t.Fatalf("post %+v", res)
		}
		path := fmt.Sprintf("/api/v1/drives/%d/readings?from=2024-05-01T00:02:00Z&to=2024-05-01T00:24:00Z&limit=10", f.drive)
		var seen []float64
		for pages := 0; ; pages++ {
			var page store.Page[store.Reading]
			h.must(http.StatusOK, http.MethodGet, path, h.admin, nil).json(t, &page)
			for _, r := range page.Items {
				seen = append(seen, *r.BusV)
			}
			if page.Next == "" {
				break
			}
			if pages > 3 {
				t.Fatal("paging does not end")
			}
			path = fmt.Sprintf("/api/v1/drives/%d/readings?from=2024-05-01T00:02:00Z&to=2024-05-01T00:24:00Z&limit=10&cursor=%s", f.drive, page.Next)
		}
		if len(seen) != 22 || seen[0] != 602 || seen[21] != 623 {
			t.Errorf("paged %v", seen)
		}
		// CSV pages carry the next page in a Link header.
		link := fmt.Sprintf("/api/v1/drives/%d/readings?limit=20", f.drive)
		var csvRows int
		for link != "" {
			req, _ := http.NewRequest(http.MethodGet, h.http.URL+link, nil)
			req.Header.Set("Authorization", "Bearer "+h.admin)
			req.Header.Set("Accept", "text/csv")
			resp, err := h.http.Client().Do(req)
			if err != nil {
				t.Fatal(err)
			}
			data, _ := io.ReadAll(resp.Body)
			resp.Body.Close()
			csvRows += strings.Count(string(data), "\n") - 1
			link = ""
			if l := resp.Header.Get("Link"); l != "" {
				link = strings.TrimSuffix(strings.TrimPrefix(l, "<"), `>; rel="next"`)
			}
		}
		if csvRows != 25 {
			t.Errorf("CSV pages held %d readings, want 25", csvRows)
		}
		for _, bad := range []string{"?limit=0", "?limit=10001", "?from=yesterday", "?cursor=%25%25", "?sort=at"} {
			if a := h.do(http.MethodGet, fmt.Sprintf("/api/v1/drives/%d/readings%s", f.drive, bad), h.admin, nil); a.status != http.StatusBadRequest && a.status != http.StatusUnprocessableEntity {
				t.Errorf("GET readings%s: %d, want 400 or 422", bad, a.status)
			}
		}
		limited := h.token(store.RoleViewer, []int64{h.buildFleet("b").site})
		if a := h.do(http.MethodGet, fmt.Sprintf("/api/v1/drives/%d/readings", f.drive), limited, nil); a.status != http.StatusNotFound {
			t.Errorf("another site's drive: %d, want 404", a.status)
		}
	})
}
