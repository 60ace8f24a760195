package api_test

import (
	"bytes"
	"context"
	"fmt"
	"net/http"
	"net/http/httptest"
	"os"
	"os/exec"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	"kelvard/api"
	"kelvard/jobs"
	"kelvard/store"
	"kelvard/store/storetest"
)

func TestMetricsEndpoint(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		h.buildFleet("a")
		a := h.must(http.StatusOK, http.MethodGet, "/metrics", "", nil)
		parser := expfmt.NewTextParser(model.UTF8Validation)
		fams, err := parser.TextToMetricFamilies(bytes.NewReader(a.body))
		if err != nil {
			t.Fatalf("parse metrics: %v", err)
		}
		for _, name := range []string{"kelvard_drives", "kelvard_findings_open", "kelvard_capacitor_end_of_life_drives",
			"kelvard_metrics_store_errors", "go_goroutines", "process_resident_memory_bytes"} {
			if fams[name] == nil {
				t.Errorf("metric %s missing", name)
			}
		}
		// One site: four bands, 8 kinds × 4 severities, three windows,
		// all present with zero values before any assessment.
		if n := len(fams["kelvard_drives"].GetMetric()); n != 4 {
			t.Errorf("kelvard_drives has %d series, want 4", n)
		}
		if n := len(fams["kelvard_findings_open"].GetMetric()); n != 32 {
			t.Errorf("kelvard_findings_open has %d series, want 32", n)
		}
		for _, m := range fams["kelvard_capacitor_end_of_life_drives"].GetMetric() {
			if v := m.GetGauge().GetValue(); v != 0 {
				t.Errorf("end-of-life count %v before any assessment", v)
			}
		}
		if v := fams["kelvard_metrics_store_errors"].GetMetric()[0].GetGauge().GetValue(); v != 0 {
			t.Errorf("store errors = %v", v)
		}

		promtool := storetest.RequireTool(t, "promtool", "prometheus")
		cmd := exec.Command(promtool, "check", "metrics")
		cmd.Stdin = bytes.NewReader(a.body)
		out, err := cmd.CombinedOutput()
		if err != nil || strings.TrimSpace(string(out)) != "" {
			t.Errorf("promtool check metrics: %v\n%s", err, out)
		}
	})
}

func TestMetricsBehindToken(t *testing.T) {
	t.Parallel()
	st := storetest.Open(t, storetest.Dialects[1])
	h := newHarnessWith(t, st, func(c *apiConfig) { c.MetricsToken = true })
	h.must(http.StatusUnauthorized, http.MethodGet, "/metrics", "", nil)
	h.must(http.StatusOK, http.MethodGet, "/metrics", h.admin, nil)
}

// TestMetricsAfterAssessment checks names, labels and values once drives
// are assessed: every assessed drive counted once by band, its per-drive
// series labelled with serial, position and site, and the job metrics read
// from the store.
func TestMetricsAfterAssessment(t *testing.T) {
	t.Parallel()
	forEachStore(t, func(t *testing.T, h *harness) {
		f := h.buildFleet("a")
		b := h.buildFleet("b")
		// Three days of running current at fleet b's position, so its
		// drive has a utilisation.
		var rows []map[string]any
		end := time.Now().UTC().Truncate(time.Hour)
		for i := 72; i > 0; i-- {
			rows = append(rows, map[string]any{"at": end.Add(-time.Duration(i) * time.Hour).Format(time.RFC3339),
				"internal_air_c": 35, "ambient_c": 30, "current_a": 15, "frequency_hz": 50})
		}
		h.must(http.StatusOK, http.MethodPost, fmt.Sprintf("/api/v1/positions/%d/readings", b.position), h.admin, rows)
		// A hose-down area for fleet a's Type 1 drive: one critical finding.
		h.must(http.StatusOK, http.MethodPatch, fmt.Sprintf("/api/v1/areas/%d", f.area), h.admin,
			map[string]any{"environment": map[string]any{"water": "hose_down"}})
		sched, err := jobs.New(jobs.Config{Store: h.store, Jobs: []jobs.Job{jobs.AssessJob{Assessor: jobs.NewAssessor(h.store, jobs.AssessConfig{})}}})
		if err != nil {
			t.Fatal(err)
		}
		if run, err := sched.Run(context.Background(), jobs.Assess, nil); err != nil || run.Status != store.JobSucceeded {
			t.Fatalf("assess: %+v %v", run, err)
		}
		srv, err := api.New(api.Config{JobStats: func(ctx context.Context) ([]api.JobStat, error) {
			stats, err := h.store.JobRunStats(ctx)
			var out []api.JobStat
			for _, s := range stats {
				js := api.JobStat{Job: s.Job}
				if d, ok := s.LastDuration(); ok {
					js.LastDurationS = d.Seconds()
				}
				if s.LastSuccessAt != nil {
					js.LastSuccessUnix, js.HasSuccess = float64(s.LastSuccessAt.Unix()), true
				}
				out = append(out, js)
			}
			return out, err
		}}, h.store, nil)
		if err != nil {
			t.Fatal(err)
		}
		rec := httptest.NewRecorder()
		srv.ServeHTTP(rec, httptest.NewRequest(http.MethodGet, "/metrics", nil))
		parser := expfmt.NewTextParser(model.UTF8Validation)
		fams, err := parser.TextToMetricFamilies(rec.Body)
		if err != nil {
			t.Fatal(err)
		}
		total := 0.0
		for _, m := range fams["kelvard_drives"].GetMetric() {
			total += m.GetGauge().GetValue()
		}
		if total != 2 {
			t.Errorf("kelvard_drives sums to %v, want the 2 assessed drives", total)
		}
		critical := 0.0
		for _, m := range fams["kelvard_findings_open"].GetMetric() {
			labels := map[string]string{}
			for _, l := range m.GetLabel() {
				labels[l.GetName()] = l.GetValue()
			}
			if labels["site"] == "Works a" && labels["kind"] == "enclosure" && labels["severity"] == "critical" {
				critical = m.GetGauge().GetValue()
			}
		}
		if critical != 1 {
			t.Errorf("critical enclosure findings at Works a: %v, want 1", critical)
		}
		caps := fams["kelvard_drive_capacitor_life_used_ratio"].GetMetric()
		if len(caps) != 2 {
			t.Fatalf("%d per-drive capacitor series, want 2", len(caps))
		}
		labels := map[string]string{}
		for _, l := range caps[0].GetLabel() {
			labels[l.GetName()] = l.GetValue()
		}
		if labels["drive"] != "S-a" || labels["position"] != "DP-a" || labels["site"] != "Works a" {
			t.Errorf("per-drive labels %v", labels)
		}
		if fams["kelvard_job_last_success_timestamp_seconds"] == nil || fams["kelvard_job_duration_seconds"] == nil {
			t.Error("job metrics missing")
		}
		// Every metric the shipped alert rules use is served, so no rule
		// waits on a series that never comes (promtool's rule tests feed
		// series of their own and cannot tell).
		alerts, err := os.ReadFile("../deploy/alerts.yml")
		if err != nil {
			t.Fatal(err)
		}
		used := regexp.MustCompile(`\bkelvard_[a-z_]+\b`).FindAllString(string(alerts), -1)
		if len(used) == 0 {
			t.Fatal("deploy/alerts.yml names no kelvard metric")
		}
		for _, name := range used {
			if fams[name] == nil {
				t.Errorf("deploy/alerts.yml uses %s, which /metrics does not serve", name)
			}
		}
	})
}
