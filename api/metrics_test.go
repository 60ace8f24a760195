package api_test

import (
	"bytes"
	"net/http"
	"os"
	"os/exec"
	"strings"
	"testing"

	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	"kelvard/store/storetest"
)

// requireTool finds a command the test needs; CI sets
// KELVARD_TEST_REQUIRE_TOOLS so a missing tool fails there.
func requireTool(t *testing.T, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("KELVARD_TEST_REQUIRE_TOOLS") != "" {
			t.Fatalf("%s is required (KELVARD_TEST_REQUIRE_TOOLS is set) but not installed", name)
		}
		t.Skipf("%s is not installed; .ci/run installs it", name)
	}
	return p
}

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

		promtool := requireTool(t, "promtool")
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
