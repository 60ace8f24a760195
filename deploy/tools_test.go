package deploy

import (
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// root is the repository's top folder: go test runs in the package's
// folder, deploy/.
const root = ".."

// requireTool finds a command the test needs. A missing tool skips the
// test, unless KELVARD_TEST_REQUIRE_TOOLS is set (as .ci/run does): then it
// fails.
func requireTool(t *testing.T, name, pkg string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err != nil {
		if os.Getenv("KELVARD_TEST_REQUIRE_TOOLS") != "" {
			t.Fatalf("%s is required (KELVARD_TEST_REQUIRE_TOOLS is set) but not installed; install Debian's %s", name, pkg)
		}
		t.Skipf("%s is not installed (Debian package %s); set KELVARD_TEST_REQUIRE_TOOLS=1 to fail instead", name, pkg)
	}
	return p
}

// readFile reads a file of the repository by its path from the top.
func readFile(t *testing.T, rel string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(root, filepath.FromSlash(rel)))
	if err != nil {
		t.Fatalf("read %s: %v", rel, err)
	}
	return b
}

// runTool runs a command and fails the test with its output when it
// exits non-zero.
func runTool(t *testing.T, dir, name string, args ...string) string {
	t.Helper()
	cmd := exec.Command(name, args...)
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("%s %v: %v\n%s", filepath.Base(name), args, err, out)
	}
	return string(out)
}
