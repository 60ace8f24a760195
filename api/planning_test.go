package api_test

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"io"
	"net/http"
	"strings"
	"testing"

	"kelvard/store"
)

// doWith sends a request with a body of the given media type and an Accept
// header.
func (h *harness) doWith(method, path, token, ctype, accept, body string) answer {
	h.t.Helper()
	req, err := http.NewRequest(method, h.http.URL+path, strings.NewReader(body))
	if err != nil {
		h.t.Fatal(err)
	}
	if ctype != "" {
		req.Header.Set("Content-Type", ctype)
	}
	if accept != "" {
		req.Header.Set("Accept", accept)
	}
	req.Header.Set("Authorization", "Bearer "+token)
	resp, err := h.http.Client().Do(req)
	if err != nil {
		h.t.Fatal(err)
	}
	defer resp.Body.Close()
	data, _ := io.ReadAll(resp.Body)
	return answer{status: resp.StatusCode, header: resp.Header, body: data}
}

// TestPlanningEndpoints checks the forecast, reliability and work order
// endpoints end to end: viewers read (within their sites), planners act,
// and the exports and the status import speak CSV and iCalendar.
func TestPlanningEndpoints(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		fa, fb := h.buildFleet("a"), h.buildFleet("b")
		viewer, planner := h.token(store.RoleViewer, nil), h.token(store.RolePlanner, nil)
		viewerA := h.token(store.RoleViewer, []int64{fa.site})

		// Planners write orders by hand; labour and parts default to the
		// task's estimate. Viewers may not.
		body := func(drive int64) map[string]any {
			return map[string]any{"lines": []map[string]any{{"drive_id": drive, "task": "replace_fan", "reason": "bearing noise"}}}
		}
		h.must(http.StatusForbidden, http.MethodPost, "/api/v1/work-orders", viewer, body(fa.drive))
		var oa, ob store.WorkOrder
		h.must(http.StatusCreated, http.MethodPost, "/api/v1/work-orders", planner, body(fa.drive)).json(t, &oa)
		h.must(http.StatusCreated, http.MethodPost, "/api/v1/work-orders", planner, body(fb.drive)).json(t, &ob)
		if oa.Lines[0].LabourH != 1 || !strings.Contains(oa.Lines[0].Parts, "fan kit") || oa.Caution == "" || oa.Status != store.OrderProposed {
			t.Errorf("order %+v", oa)
		}
		p := h.must(http.StatusUnprocessableEntity, http.MethodPost, "/api/v1/work-orders", planner,
			map[string]any{"lines": []map[string]any{{"drive_id": fa.drive, "task": "paint"}}}).problem(t)
		if f := fieldsOf(p); !f.has("lines[0].task") || !f.has("lines[0].reason") {
			t.Errorf("bad lines: %v", f)
		}

		// Viewers read, within their sites.
		var page store.Page[store.WorkOrder]
		h.must(http.StatusOK, http.MethodGet, "/api/v1/work-orders", viewer, nil).json(t, &page)
		if len(page.Items) != 2 {
			t.Errorf("viewer lists %d orders", len(page.Items))
		}
		h.must(http.StatusOK, http.MethodGet, "/api/v1/work-orders?status=open&site_id="+fmt.Sprint(fa.site), viewerA, nil).json(t, &page)
		if len(page.Items) != 1 || page.Items[0].ID != oa.ID {
			t.Errorf("site-limited viewer lists %+v", page.Items)
		}
		h.must(http.StatusNotFound, http.MethodGet, fmt.Sprintf("/api/v1/work-orders/%d", ob.ID), viewerA, nil)
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/work-orders?drive_id=%d", fa.drive), viewer, nil).json(t, &page)
		if len(page.Items) != 1 {
			t.Errorf("drive filter lists %d", len(page.Items))
		}
		h.must(http.StatusBadRequest, http.MethodGet, "/api/v1/work-orders?colour=red", viewer, nil)

		// Planners move orders on; viewers may not.
		path := fmt.Sprintf("/api/v1/work-orders/%d", oa.ID)
		h.must(http.StatusForbidden, http.MethodPatch, path, viewer, map[string]any{"status": "approved"})
		h.must(http.StatusBadRequest, http.MethodPatch, path, planner, map[string]any{"colour": "red"})
		p = h.must(http.StatusUnprocessableEntity, http.MethodPatch, path, planner, map[string]any{"status": "done"}).problem(t)
		if !fieldsOf(p).has("status") {
			t.Errorf("done from proposed: %+v", p)
		}
		var got store.WorkOrder
		h.must(http.StatusOK, http.MethodPatch, path, planner, map[string]any{"status": "approved", "external_ref": "PM-1"}).json(t, &got)
		if got.Status != store.OrderApproved || !strings.HasSuffix(got.ApprovedBy, ":planner") || got.ExternalRef != "PM-1" {
			t.Errorf("approved %+v", got)
		}
		h.must(http.StatusConflict, http.MethodPatch, fmt.Sprintf("/api/v1/work-orders/%d", ob.ID), planner, map[string]any{"external_ref": "PM-1"})

		// Exports: CSV and iCalendar by Accept or format.
		a := h.doWith(http.MethodGet, "/api/v1/work-orders", viewer, "", "text/csv", "")
		recs, err := csv.NewReader(bytes.NewReader(a.body)).ReadAll()
		if a.status != http.StatusOK || !strings.HasPrefix(a.header.Get("Content-Type"), "text/csv") || err != nil || len(recs) != 3 || recs[0][0] != "work_order_id" {
			t.Errorf("CSV export %d %s: %s", a.status, a.header.Get("Content-Type"), a.body)
		}
		a = h.doWith(http.MethodGet, "/api/v1/work-orders?format=ics", viewer, "", "", "")
		if a.status != http.StatusOK || !strings.HasPrefix(a.header.Get("Content-Type"), "text/calendar") ||
			!strings.HasPrefix(string(a.body), "BEGIN:VCALENDAR\r\n") || strings.Count(string(a.body), "BEGIN:VTODO") != 2 {
			t.Errorf("iCalendar export %d %s: %s", a.status, a.header.Get("Content-Type"), a.body)
		}

		// Status import: planners only, CSV only, every row or nothing.
		file := "external_ref,status,scheduled_for\nPM-1,scheduled,2026-04-01\n"
		if a := h.doWith(http.MethodPost, "/api/v1/work-orders/import", viewer, "text/csv", "", file); a.status != http.StatusForbidden {
			t.Errorf("viewer import: %d", a.status)
		}
		if a := h.doWith(http.MethodPost, "/api/v1/work-orders/import", planner, "application/json", "", file); a.status != http.StatusUnsupportedMediaType {
			t.Errorf("JSON import: %d", a.status)
		}
		a = h.doWith(http.MethodPost, "/api/v1/work-orders/import", planner, "text/csv", "", "external_ref,status\nPM-1,scheduled\nPM-9,approved\n")
		if a.status != http.StatusUnprocessableEntity || !strings.Contains(string(a.body), `"line":3`) {
			t.Errorf("bad import: %d %s", a.status, a.body)
		}
		a = h.doWith(http.MethodPost, "/api/v1/work-orders/import", planner, "text/csv", "", file)
		var res store.StatusImportResult
		a.json(t, &res)
		if a.status != http.StatusOK || res.Changed != 1 {
			t.Errorf("import: %d %s", a.status, a.body)
		}
		h.must(http.StatusOK, http.MethodGet, path, viewer, nil).json(t, &got)
		if got.Status != store.OrderScheduled || got.ScheduledFor == nil {
			t.Errorf("after import %+v", got)
		}

		// Forecast and reliability: viewers read JSON and CSV.
		var fc struct {
			HorizonMonths int              `json:"horizon_months"`
			Months        []map[string]any `json:"months"`
		}
		h.must(http.StatusOK, http.MethodGet, "/api/v1/forecast", viewer, nil).json(t, &fc)
		if fc.HorizonMonths != 24 || len(fc.Months) != 24 {
			t.Errorf("forecast %+v", fc)
		}
		h.must(http.StatusBadRequest, http.MethodGet, "/api/v1/forecast?horizon_months=0", viewer, nil)
		h.must(http.StatusBadRequest, http.MethodGet, "/api/v1/forecast?refurbish_share=2", viewer, nil)
		a = h.doWith(http.MethodGet, "/api/v1/forecast?table=budget", viewer, "", "text/csv", "")
		if a.status != http.StatusOK || !strings.HasPrefix(string(a.body), "month,site,capacitor_refurbishments") {
			t.Errorf("budget CSV %d: %s", a.status, a.body)
		}
		var rel struct {
			Groups []struct {
				Dimension string `json:"dimension"`
			} `json:"groups"`
			Spares []map[string]any `json:"spares"`
		}
		h.must(http.StatusOK, http.MethodGet, "/api/v1/reliability?dimension=model", viewer, nil).json(t, &rel)
		if len(rel.Groups) == 0 || len(rel.Spares) != 2 {
			t.Errorf("reliability %+v", rel)
		}
		for _, g := range rel.Groups {
			if g.Dimension != "model" {
				t.Errorf("dimension filter let %s through", g.Dimension)
			}
		}
		h.must(http.StatusBadRequest, http.MethodGet, "/api/v1/reliability?mode=sparks", viewer, nil)
		h.must(http.StatusOK, http.MethodGet, "/api/v1/reliability", viewerA, nil).json(t, &rel)
		if len(rel.Spares) != 1 {
			t.Errorf("site-limited viewer sees spares of %d models", len(rel.Spares))
		}
	})
}
