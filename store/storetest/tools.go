package storetest

import (
	"os"
	"os/exec"
	"testing"
)

// RequireTool finds a command a test needs (chromium, promtool, pg_dump)
// and returns its path. A missing tool skips the test, unless
// KELVARD_TEST_REQUIRE_TOOLS is set (.ci/run sets it and installs every
// tool): then the test fails. pkg names the Debian package that holds
// the command.
func RequireTool(t testing.TB, name, pkg string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("KELVARD_TEST_REQUIRE_TOOLS") != "" {
			t.Fatalf("%s is required (KELVARD_TEST_REQUIRE_TOOLS is set) but not installed; install Debian's %s", name, pkg)
		}
		t.Skipf("%s is not installed (Debian package %s); .ci/run installs it, and KELVARD_TEST_REQUIRE_TOOLS=1 fails instead of skipping", name, pkg)
	}
	return p
}
