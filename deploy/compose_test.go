package deploy

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/compose-spec/compose-go/v2/loader"
	"github.com/compose-spec/compose-go/v2/types"
)

// TestCompose loads docker-compose.yml with the compose-spec loader (the
// schema check, interpolation and normalisation docker compose does) and
// checks how the services fit together.
func TestCompose(t *testing.T) {
	t.Parallel()
	dir, err := filepath.Abs(root)
	if err != nil {
		t.Fatal(err)
	}
	env := types.Mapping{
		"KELVARD_BOOTSTRAP_TOKEN":  "kvd_abcdefgh_0123456789abcdef0123456789abcdef",
		"KELVARD_PROMETHEUS_TOKEN": "kvd_ijklmnop_0123456789abcdef0123456789abcdef",
	}
	project, err := loader.LoadWithContext(context.Background(), types.ConfigDetails{
		WorkingDir:  dir,
		ConfigFiles: []types.ConfigFile{{Filename: filepath.Join(dir, "docker-compose.yml")}},
		Environment: env,
	}, func(o *loader.Options) { o.SetProjectName("kelvard", true) })
	if err != nil {
		t.Fatalf("load docker-compose.yml: %v", err)
	}
	for _, name := range []string{"postgres", "kelvard", "prometheus"} {
		if _, ok := project.Services[name]; !ok {
			t.Fatalf("service %s missing", name)
		}
	}
	pg, kv, prom := project.Services["postgres"], project.Services["kelvard"], project.Services["prometheus"]

	if pg.HealthCheck == nil || len(pg.HealthCheck.Test) < 2 || pg.HealthCheck.Test[1] != "pg_isready" {
		t.Errorf("postgres healthcheck %+v, want pg_isready", pg.HealthCheck)
	}
	if !mountsVolume(pg, "/var/lib/postgresql/data") {
		t.Error("postgres keeps its data outside a named volume")
	}

	if kv.Build == nil || kv.Build.Dockerfile != "Dockerfile" || filepath.Clean(kv.Build.Context) != dir {
		t.Errorf("kelvard build %+v, want the top folder's Dockerfile", kv.Build)
	}
	if dep, ok := kv.DependsOn["postgres"]; !ok || dep.Condition != types.ServiceConditionHealthy {
		t.Errorf("kelvard depends on postgres %+v, want condition service_healthy", dep)
	}
	url := value(kv.Environment, "KELVARD_DATABASE_URL")
	if !strings.HasPrefix(url, "postgres://") || !strings.Contains(url, "@postgres:5432/") {
		t.Errorf("KELVARD_DATABASE_URL %q does not point at the postgres service", url)
	}
	if got := value(kv.Environment, "KELVARD_BOOTSTRAP_TOKEN"); got != env["KELVARD_BOOTSTRAP_TOKEN"] {
		t.Errorf("KELVARD_BOOTSTRAP_TOKEN %q is not taken from the environment", got)
	}
	if value(kv.Environment, "KELVARD_METRICS_TOKEN") != "true" {
		t.Error("/metrics is left open")
	}
	if len(kv.Ports) != 1 || kv.Ports[0].Target != 8080 || kv.Ports[0].Published != "8080" {
		t.Errorf("kelvard ports %+v, want 8080:8080", kv.Ports)
	}

	// Without the variable, the placeholder: kelvard refuses it at start.
	bare, err := loader.LoadWithContext(context.Background(), types.ConfigDetails{
		WorkingDir:  dir,
		ConfigFiles: []types.ConfigFile{{Filename: filepath.Join(dir, "docker-compose.yml")}},
		Environment: types.Mapping{},
	}, func(o *loader.Options) {
		o.SetProjectName("kelvard", true)
		o.SkipResolveEnvironment = true
	})
	if err != nil {
		t.Fatalf("load without environment: %v", err)
	}
	if got := value(bare.Services["kelvard"].Environment, "KELVARD_BOOTSTRAP_TOKEN"); !strings.HasPrefix(got, "CHANGE-ME") {
		t.Errorf("default bootstrap token %q is not an obvious placeholder", got)
	}

	// Prometheus reads the two files of deploy/ where prometheus.yml
	// expects them, and the token file its credentials_file names.
	want := map[string]string{
		"/etc/prometheus/prometheus.yml": filepath.Join(dir, "deploy", "prometheus.yml"),
		"/etc/prometheus/alerts.yml":     filepath.Join(dir, "deploy", "alerts.yml"),
	}
	for _, v := range prom.Volumes {
		if src, ok := want[v.Target]; ok {
			if v.Type != types.VolumeTypeBind || v.Source != src || !v.ReadOnly {
				t.Errorf("prometheus mounts %s from %s (read-only %v), want %s read-only", v.Target, v.Source, v.ReadOnly, src)
			}
			if _, err := os.Stat(v.Source); err != nil {
				t.Errorf("mounted file: %v", err)
			}
			delete(want, v.Target)
		}
	}
	for target := range want {
		t.Errorf("prometheus does not mount %s", target)
	}
	found := false
	for _, s := range prom.Secrets {
		if "/run/secrets/"+s.Target == credentialsFile {
			found = true
			sec, ok := project.Secrets[s.Source]
			if !ok || sec.Environment != "KELVARD_PROMETHEUS_TOKEN" {
				t.Errorf("secret %s = %+v, want it from KELVARD_PROMETHEUS_TOKEN", s.Source, sec)
			}
		}
	}
	if !found {
		t.Errorf("no secret of prometheus lands at %s, the credentials_file of prometheus.yml", credentialsFile)
	}
	if !strings.Contains(string(readFile(t, "deploy/prometheus.yml")), `"kelvard:8080"`) {
		t.Error("prometheus.yml does not scrape the kelvard service on 8080")
	}
}

// mountsVolume reports whether a service mounts a named volume at target.
func mountsVolume(s types.ServiceConfig, target string) bool {
	for _, v := range s.Volumes {
		if v.Type == types.VolumeTypeVolume && v.Target == target {
			return true
		}
	}
	return false
}

// value is an environment variable of a service, "" when unset.
func value(env types.MappingWithEquals, key string) string {
	if v := env[key]; v != nil {
		return *v
	}
	return ""
}
