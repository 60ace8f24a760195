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
