package api_test

import (
	"fmt"
	"net/http"
	"strings"
	"testing"
	"time"

	"kelvard/store"
)

// fleet is a register built through the API.
type fleet struct {
	site, area, model, position, drive int64
}

func (h *harness) buildFleet(suffix string) fleet {
	h.t.Helper()
	var f fleet
	f.site = h.create("/api/v1/sites", map[string]any{"name": "Works " + suffix, "elevation_m": 900, "time_zone": "UTC",
		"ambient_min_c": -2, "ambient_max_c": 41})
	f.area = h.create("/api/v1/areas", map[string]any{"site_id": f.site, "name": "Dosing room " + suffix,
		"environment": map[string]any{"location": "indoor", "sun": "none", "ambient_min_c": 10, "ambient_max_c": 35,
			"water": "dripping", "dust": "none", "oil": "none", "condensation": true, "salt_air": false, "corrosion": "G3",
			"hazardous_classified": false}})
	f.model = h.create("/api/v1/drive-models", map[string]any{"name": "Model " + suffix, "voltage_class_v": 480,
		"normal_duty_current_a": 24, "normal_duty_power_kw": 15, "heavy_duty_current_a": 21, "heavy_duty_power_kw": 11,
		"carrier_derate": []map[string]any{{"carrier_khz": 8, "fraction": 0.85}, {"carrier_khz": 12, "fraction": 0.7}},
		"enclosure":      map[string]any{"nema_type": "1", "ip_code": "IP21"},
		"capacitor":      map[string]any{"rated_life_h": 5000, "rated_temp_c": 105, "rating_includes_ripple": true, "ripple_rise_c": 5},
		"fan":            map[string]any{"l10_h": 40000, "ref_temp_c": 60, "halving_interval_c": 10, "runs": "when_warm"}})
	f.position = h.create("/api/v1/positions", map[string]any{"area_id": f.area, "tag": "DP-" + suffix, "supply_voltage_v": 480,
		"mounting": "cabinet", "cabinet": map[string]any{"nema_type": "12", "cooling": "sealed", "material": "painted_steel",
			"height_m": 2, "width_m": 0.8, "depth_m": 0.6, "placement": "against_wall"}})
	f.drive = h.create("/api/v1/drives", map[string]any{"serial": "S-" + suffix, "model_id": f.model, "site_id": f.site,
		"manufactured_at": "2021-04-01T00:00:00Z"})
	h.must(http.StatusCreated, http.MethodPost, fmt.Sprintf("/api/v1/drives/%d/installations", f.drive), h.admin,
		map[string]any{"position_id": f.position, "at": "2021-06-01T08:00:00Z"})
	return f
}

func TestRegisterEndpoints(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")

		// Every collection lists, gets and patches.
		for _, c := range []struct {
			path  string
			patch map[string]any
			check func(map[string]any) bool
		}{
			{fmt.Sprintf("/api/v1/sites/%d", f.site), map[string]any{"notes": "coastal", "parameters": map[string]any{"data_quality": map[string]any{"silent_after_s": 7200}}},
				func(m map[string]any) bool {
					p, _ := m["parameters"].(map[string]any)
					dq, _ := p["data_quality"].(map[string]any)
					return m["notes"] == "coastal" && dq["silent_after_s"] == 7200.0
				}},
			{fmt.Sprintf("/api/v1/areas/%d", f.area), map[string]any{"environment": map[string]any{"corrosion": "G2"}},
				func(m map[string]any) bool {
					env := m["environment"].(map[string]any)
					return env["corrosion"] == "G2" && env["water"] == "dripping"
				}},
			{fmt.Sprintf("/api/v1/drive-models/%d", f.model), map[string]any{"spares_on_hand": 2}, func(m map[string]any) bool { return m["spares_on_hand"] == 2.0 }},
			{fmt.Sprintf("/api/v1/positions/%d", f.position), map[string]any{"carrier_khz": 8}, func(m map[string]any) bool { return m["carrier_khz"] == 8.0 }},
			{fmt.Sprintf("/api/v1/drives/%d", f.drive), map[string]any{"notes": "rewound"}, func(m map[string]any) bool { return m["notes"] == "rewound" }},
		} {
			var got map[string]any
			h.must(http.StatusOK, http.MethodPatch, c.path, h.admin, c.patch).json(t, &got)
			if !c.check(got) {
				t.Errorf("PATCH %s gave %v", c.path, got)
			}
			h.must(http.StatusOK, http.MethodGet, c.path, h.admin, nil).json(t, &got)
			if !c.check(got) {
				t.Errorf("GET %s after PATCH gave %v", c.path, got)
			}
			list := c.path[:strings.LastIndex(c.path, "/")]
			var page struct {
				Items []map[string]any `json:"items"`
			}
			h.must(http.StatusOK, http.MethodGet, list, h.admin, nil).json(t, &page)
			if len(page.Items) != 1 {
				t.Errorf("GET %s listed %d items, want 1", list, len(page.Items))
			}
		}

		// Components: listed, added, changed, removed.
		comps := fmt.Sprintf("/api/v1/drives/%d/components", f.drive)
		var page struct {
			Items []store.Component `json:"items"`
		}
		h.must(http.StatusOK, http.MethodGet, comps, h.admin, nil).json(t, &page)
		if len(page.Items) != 2 {
			t.Fatalf("new drive has %d components, want 2", len(page.Items))
		}
		cid := h.create(comps, map[string]any{"kind": "cooling_fan", "installed_at": "2024-01-10T00:00:00Z", "part": "FAN-120"})
		h.must(http.StatusOK, http.MethodPatch, fmt.Sprintf("%s/%d", comps, page.Items[1].ID), h.admin, map[string]any{"removed_at": "2024-01-10T00:00:00Z"})
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("%s/%d", comps, cid), h.admin, nil)
		h.must(http.StatusNotFound, http.MethodGet, fmt.Sprintf("%s/%d", comps, cid), h.admin, nil)

		// Events: by drive, and by position attributed to the drive there.
		ev := h.create("/api/v1/events", map[string]any{"position_id": f.position, "at": "2024-02-01T10:00:00Z", "type": "trip",
			"trip_cause": "over_voltage", "state": "decelerating"})
		var e store.Event
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/events/%d", ev), h.admin, nil).json(t, &e)
		if e.DriveID != f.drive {
			t.Errorf("event by position went to drive %d, want %d", e.DriveID, f.drive)
		}
		h.must(http.StatusCreated, http.MethodPost, "/api/v1/events", h.admin, map[string]any{"drive_id": f.drive, "at": "2024-03-01T10:00:00Z",
			"type": "failure", "failure_mode": "cooling_fan", "failure_cause": "dust_or_contamination"})
		var events struct {
			Items []store.Event `json:"items"`
		}
		h.must(http.StatusOK, http.MethodGet, "/api/v1/events?type=trip&from=2024-01-01T00:00:00Z", h.admin, nil).json(t, &events)
		if len(events.Items) != 1 {
			t.Errorf("filtered events: %d, want 1", len(events.Items))
		}
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/events/%d", ev), h.admin, nil)

		// The audit log saw the writes.
		var audit struct {
			Items []store.AuditEntry `json:"items"`
		}
		h.must(http.StatusOK, http.MethodGet, "/api/v1/audit?resource=sites", h.admin, nil).json(t, &audit)
		if len(audit.Items) != 2 || audit.Items[0].Action != "update" || !strings.HasPrefix(audit.Items[0].Actor, "token:") {
			t.Errorf("audit of sites: %+v", audit.Items)
		}
	})
}

func TestValidationAnswers(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		for _, c := range []struct {
			name, method, path string
			body               any
			status             int
			fields             []string
		}{
			{"malformed JSON", "POST", "/api/v1/sites", `{"name":`, 400, []string{"body"}},
			{"not an object", "POST", "/api/v1/sites", `[1,2]`, 400, []string{"body"}},
			{"wrong type", "POST", "/api/v1/sites", `{"name": 5, "ambient_min_c": 0, "ambient_max_c": 1}`, 400, []string{"name"}},
			{"read-only id", "POST", "/api/v1/sites", map[string]any{"id": 7, "name": "x", "ambient_min_c": 0, "ambient_max_c": 1}, 400, []string{"id"}},
			{"unknown field", "POST", "/api/v1/sites", map[string]any{"name": "x", "colour": "red"}, 400, []string{"colour"}},
			{"unknown nested field", "POST", "/api/v1/areas", map[string]any{"site_id": f.site, "name": "x", "environment": map[string]any{"rain": true}}, 400, []string{"environment.rain"}},
			{"ranges", "POST", "/api/v1/sites", map[string]any{"name": "", "elevation_m": 9000, "ambient_min_c": 30, "ambient_max_c": 10}, 422,
				[]string{"name", "elevation_m", "ambient_max_c"}},
			{"enumeration", "POST", "/api/v1/areas", map[string]any{"site_id": f.site, "name": "Wet", "environment": map[string]any{"water": "rain"}}, 422, []string{"environment.water"}},
			{"reference", "POST", "/api/v1/positions", map[string]any{"area_id": 9999, "tag": "X", "supply_voltage_v": 400}, 422, []string{"area_id"}},
			{"enclosure code", "POST", "/api/v1/drive-models", map[string]any{"name": "M2", "voltage_class_v": 400, "normal_duty_current_a": 10,
				"normal_duty_power_kw": 4, "heavy_duty_current_a": 8, "heavy_duty_power_kw": 3, "enclosure": map[string]any{"nema_type": "4Z"}}, 422, []string{"enclosure"}},
			{"carrier table", "PATCH", fmt.Sprintf("/api/v1/drive-models/%d", f.model), map[string]any{"carrier_derate": []map[string]any{{"carrier_khz": 2, "fraction": 1.2}}}, 422,
				[]string{"carrier_derate[0].carrier_khz", "carrier_derate[0].fraction"}},
			{"cabinet missing", "PATCH", fmt.Sprintf("/api/v1/positions/%d", f.position), map[string]any{"cabinet": map[string]any{"cooling": "fan_ventilated"}}, 422,
				[]string{"cabinet.airflow_m3_per_h"}},
			{"parameters out of range", "PATCH", fmt.Sprintf("/api/v1/sites/%d", f.site), map[string]any{"parameters": map[string]any{"capacitor": map[string]any{"horizon_days": -5}}}, 422, []string{"parameters"}},
			{"parameters unknown", "PATCH", fmt.Sprintf("/api/v1/areas/%d", f.area), map[string]any{"parameters": map[string]any{"colour": 1}}, 422, []string{"parameters"}},
			{"patch unlisted field", "PATCH", fmt.Sprintf("/api/v1/areas/%d", f.area), map[string]any{"site_id": 1}, 400, []string{"site_id"}},
			{"patch created_at", "PATCH", fmt.Sprintf("/api/v1/sites/%d", f.site), map[string]any{"created_at": "2020-01-01T00:00:00Z"}, 400, []string{"created_at"}},
			{"status installed directly", "PATCH", fmt.Sprintf("/api/v1/drives/%d", f.drive), map[string]any{"status": "in_repair"}, 422, []string{"status"}},
			{"duplicate serial", "POST", "/api/v1/drives", map[string]any{"serial": "S-a", "model_id": f.model, "site_id": f.site, "manufactured_at": "2022-01-01T00:00:00Z"}, 409, nil},
			{"event cause", "POST", "/api/v1/events", map[string]any{"drive_id": f.drive, "at": "2024-01-01T00:00:00Z", "type": "trip"}, 422, []string{"trip_cause"}},
			{"event future", "POST", "/api/v1/events", map[string]any{"drive_id": f.drive, "at": time.Now().Add(time.Hour).UTC().Format(time.RFC3339), "type": "power_up"}, 422, []string{"at"}},
			{"bad time", "POST", "/api/v1/events", `{"drive_id": 1, "at": "yesterday", "type": "power_up"}`, 400, []string{"body"}},
			{"bad filter", "GET", "/api/v1/drives?colour=red", nil, 400, []string{"colour"}},
			{"bad filter value", "GET", "/api/v1/drives?status=lost", nil, 422, []string{"status"}},
			{"bad limit", "GET", "/api/v1/drives?limit=0", nil, 400, []string{"limit"}},
			{"bad cursor", "GET", "/api/v1/drives?cursor=zzz", nil, 422, []string{"cursor"}},
			{"not an id", "GET", "/api/v1/drives/abc", nil, 404, nil},
			{"missing", "GET", "/api/v1/drives/99999", nil, 404, nil},
			{"move to nowhere", "POST", fmt.Sprintf("/api/v1/drives/%d/installations", f.drive), map[string]any{"position_id": 99999}, 422, []string{"position_id"}},
		} {
			t.Run(c.name, func(t *testing.T) {
				a := h.do(c.method, c.path, h.admin, c.body)
				if a.status != c.status {
					t.Fatalf("status %d, want %d: %s", a.status, c.status, a.body)
				}
				p := a.problem(t)
				if p.Status != c.status || p.Title == "" {
					t.Errorf("problem %+v", p)
				}
				got := fieldsOf(p)
				for _, want := range c.fields {
					if !got.has(want) {
						t.Errorf("problem names %v, want %s: %s", got, want, a.body)
					}
				}
			})
		}
		// Nothing half-written by the failures.
		var sites struct{ Items []store.Site }
		h.must(http.StatusOK, http.MethodGet, "/api/v1/sites", h.admin, nil).json(t, &sites)
		if len(sites.Items) != 1 {
			t.Errorf("%d sites after failed creates, want 1", len(sites.Items))
		}
	})
}

func TestReferencedDeletes(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		for _, path := range []string{
			fmt.Sprintf("/api/v1/sites/%d", f.site),
			fmt.Sprintf("/api/v1/areas/%d", f.area),
			fmt.Sprintf("/api/v1/drive-models/%d", f.model),
			fmt.Sprintf("/api/v1/positions/%d", f.position),
			fmt.Sprintf("/api/v1/drives/%d", f.drive),
		} {
			a := h.do(http.MethodDelete, path, h.admin, nil)
			if a.status != http.StatusConflict {
				t.Errorf("DELETE %s: %d, want 409: %s", path, a.status, a.body)
				continue
			}
			if p := a.problem(t); !strings.Contains(p.Detail, "refer to it") {
				t.Errorf("DELETE %s: detail %q does not say what refers", path, p.Detail)
			}
		}
		// Undo the installation, then the drive and position can go.
		var hist struct{ Items []store.Installation }
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d/installations", f.drive), h.admin, nil).json(t, &hist)
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/drives/%d/installations/%d", f.drive, hist.Items[0].ID), h.admin, nil)
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/drives/%d", f.drive), h.admin, nil)
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/positions/%d", f.position), h.admin, nil)
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/drive-models/%d", f.model), h.admin, nil)
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/areas/%d", f.area), h.admin, nil)
		h.must(http.StatusNoContent, http.MethodDelete, fmt.Sprintf("/api/v1/sites/%d", f.site), h.admin, nil)
	})
}

func TestCursorPaging(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		for i := 0; i < 11; i++ {
			h.create("/api/v1/positions", map[string]any{"area_id": f.area, "tag": fmt.Sprintf("P-%02d", i), "supply_voltage_v": 400})
		}
		seen := map[int64]bool{}
		path := fmt.Sprintf("/api/v1/positions?limit=4&area_id=%d", f.area)
		pages := 0
		for path != "" {
			var page struct {
				Items []store.Position `json:"items"`
				Next  string           `json:"next_cursor"`
			}
			h.must(http.StatusOK, http.MethodGet, path, h.admin, nil).json(t, &page)
			pages++
			for _, p := range page.Items {
				if seen[p.ID] {
					t.Errorf("position %d on two pages", p.ID)
				}
				seen[p.ID] = true
			}
			path = ""
			if page.Next != "" {
				path = fmt.Sprintf("/api/v1/positions?limit=4&area_id=%d&cursor=%s", f.area, page.Next)
			}
		}
		if len(seen) != 12 || pages != 3 {
			t.Errorf("paged %d positions over %d pages, want 12 over 3", len(seen), pages)
		}
	})
}

func TestDriveSwapThroughAPI(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		spare := h.create("/api/v1/drives", map[string]any{"serial": "SPARE", "model_id": f.model, "site_id": f.site,
			"manufactured_at": "2022-01-01T00:00:00Z", "last_energised_at": "2023-01-01T00:00:00Z"})
		var res store.MoveResult
		h.must(http.StatusCreated, http.MethodPost, fmt.Sprintf("/api/v1/drives/%d/installations", spare), h.admin,
			map[string]any{"position_id": f.position, "at": "2024-05-01T06:00:00Z", "notes": "swap after trip"}).json(t, &res)
		if res.Displaced == nil || *res.Displaced != f.drive || res.Opened == nil {
			t.Fatalf("swap answer %+v", res)
		}
		var old, fresh store.Drive
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d", f.drive), h.admin, nil).json(t, &old)
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d", spare), h.admin, nil).json(t, &fresh)
		if old.Status != "in_stores" || old.PositionID != nil || fresh.Status != "installed" || fresh.PositionID == nil || *fresh.PositionID != f.position {
			t.Errorf("after swap: old %+v, new %+v", old, fresh)
		}
		var hist struct{ Items []store.Installation }
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d/installations", f.drive), h.admin, nil).json(t, &hist)
		if len(hist.Items) != 1 || hist.Items[0].RemovedAt == nil || hist.Items[0].RemovedAt.Format(time.RFC3339) != "2024-05-01T06:00:00Z" {
			t.Errorf("old drive history %+v", hist.Items)
		}
		// An installation belongs to its drive's path only.
		h.must(http.StatusNotFound, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d/installations/%d", spare, hist.Items[0].ID), h.admin, nil)
		// Out for repair.
		h.must(http.StatusCreated, http.MethodPost, fmt.Sprintf("/api/v1/drives/%d/installations", spare), h.admin,
			map[string]any{"position_id": nil, "at": "2024-06-01T06:00:00Z", "status": "in_repair"})
		h.must(http.StatusOK, http.MethodGet, fmt.Sprintf("/api/v1/drives/%d", spare), h.admin, nil).json(t, &fresh)
		if fresh.Status != "in_repair" || fresh.PositionID != nil {
			t.Errorf("after removal: %+v", fresh)
		}
	})
}
