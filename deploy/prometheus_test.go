package deploy

import (
	"kelvard/store/storetest"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"sigs.k8s.io/yaml"
)

// credentialsFile is where deploy/prometheus.yml reads the scrape token:
// the compose secret kelvard_metrics_token.
const credentialsFile = "/run/secrets/kelvard_metrics_token"

// prometheusConfigCopy writes deploy/prometheus.yml and deploy/alerts.yml
// into a temporary folder, with the token file replaced by one that
// exists there (promtool check config insists the file exists). It returns
// the folder and the configuration's path.
func prometheusConfigCopy(t *testing.T) (dir, config string) {
	t.Helper()
	dir = t.TempDir()
	cfg := string(readFile(t, "deploy/prometheus.yml"))
	if n := strings.Count(cfg, credentialsFile); n != 1 {
		t.Fatalf("deploy/prometheus.yml names %s %d times, want once", credentialsFile, n)
	}
	token := filepath.Join(dir, "metrics-token")
	if err := os.WriteFile(token, []byte("kvd_test0000_placeholder\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	cfg = strings.Replace(cfg, credentialsFile, token, 1)
	config = filepath.Join(dir, "prometheus.yml")
	if err := os.WriteFile(config, []byte(cfg), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "alerts.yml"), readFile(t, "deploy/alerts.yml"), 0o600); err != nil {
		t.Fatal(err)
	}
	return dir, config
}

// TestPrometheusConfig runs promtool check config, which also checks the
// rule files the configuration names.
func TestPrometheusConfig(t *testing.T) {
	t.Parallel()
	promtool := storetest.RequireTool(t, "promtool", "prometheus")
	dir, config := prometheusConfigCopy(t)
	out := runTool(t, dir, promtool, "check", "config", config)
	if !strings.Contains(out, "SUCCESS: 1 rule files found") {
		t.Errorf("promtool check config did not check the alert rules:\n%s", out)
	}
}

// TestAlertRules checks the rules and runs their unit tests, and holds
// every alert to having a unit test and the annotations operators read.
func TestAlertRules(t *testing.T) {
	t.Parallel()
	promtool := storetest.RequireTool(t, "promtool", "prometheus")
	runTool(t, ".", promtool, "check", "rules", "alerts.yml")
	out := runTool(t, ".", promtool, "test", "rules", "alerts_test.yml")
	if !strings.Contains(out, "SUCCESS") {
		t.Errorf("promtool test rules:\n%s", out)
	}

	var rules struct {
		Groups []struct {
			Name  string `json:"name"`
			Rules []struct {
				Alert       string            `json:"alert"`
				Expr        string            `json:"expr"`
				Labels      map[string]string `json:"labels"`
				Annotations map[string]string `json:"annotations"`
			} `json:"rules"`
		} `json:"groups"`
	}
	if err := yaml.Unmarshal(readFile(t, "deploy/alerts.yml"), &rules); err != nil {
		t.Fatalf("parse alerts.yml: %v", err)
	}
	tests := string(readFile(t, "deploy/alerts_test.yml"))
	// The fleet group's alerts ask someone to go to a drive: each carries
	// the safety caution, in full in its own annotation and in short in
	// the description, which every receiver shows.
	physical := 0
	for _, g := range rules.Groups {
		for _, r := range g.Rules {
			if r.Annotations["summary"] == "" || r.Annotations["description"] == "" {
				t.Errorf("%s: summary and description annotations are required", r.Alert)
			}
			switch r.Labels["severity"] {
			case "critical", "warning", "info":
			default:
				t.Errorf("%s: severity label %q", r.Alert, r.Labels["severity"])
			}
			// One firing and one quiet evaluation at least.
			if n := strings.Count(tests, "alertname: "+r.Alert+"\n"); n < 2 {
				t.Errorf("%s: %d evaluations in alerts_test.yml, want a firing and a quiet one", r.Alert, n)
			}
			if g.Name == "kelvard-fleet" {
				physical++
				s := r.Annotations["safety"]
				for _, want := range []string{"isolating and locking out", "DC bus", "discharge time", "rated meter",
					"electrical codes", "maker's manual", "licensed practice"} {
					if !strings.Contains(s, want) {
						t.Errorf("%s: safety annotation lacks %q", r.Alert, want)
					}
				}
				for _, want := range []string{"isolate and lock out", "DC-bus discharge time", "prove zero volts"} {
					if !strings.Contains(r.Annotations["description"], want) {
						t.Errorf("%s: description lacks the short caution %q", r.Alert, want)
					}
				}
			}
		}
	}
	if physical < 5 {
		t.Errorf("the kelvard-fleet group has %d alerts, want at least the 5 that send someone to a drive", physical)
	}
}
