package faults

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// kelvardBin is the path of the kelvard binary TestMain builds for the
// tests, which start it as a child process.
var kelvardBin string

// TestMain builds the real binary once with the go command that runs the
// tests, then runs them.
func TestMain(m *testing.M) {
	os.Exit(buildAndRun(m))
}

func buildAndRun(m *testing.M) int {
	dir, err := os.MkdirTemp("", "kelvard-faults-")
	if err != nil {
		fmt.Fprintln(os.Stderr, "faults: temp dir:", err)
		return 1
	}
	defer os.RemoveAll(dir)
	bin, err := buildKelvard(dir)
	if err != nil {
		fmt.Fprintln(os.Stderr, "faults:", err)
		return 1
	}
	kelvardBin = bin
	return m.Run()
}

// buildKelvard runs `go build -o DIR/kelvard kelvard`.
func buildKelvard(dir string) (string, error) {
	goCmd, err := goCommand()
	if err != nil {
		return "", err
	}
	bin := filepath.Join(dir, "kelvard")
	cmd := exec.Command(goCmd, "build", "-o", bin, "kelvard")
	cmd.Env = os.Environ()
	out, err := cmd.CombinedOutput()
	if err != nil {
		return "", fmt.Errorf("go build kelvard: %w\n%s", err, out)
	}
	return bin, nil
}

// goCommand finds the go command: the one of the GOROOT the tests run
// under, else the first on PATH.
func goCommand() (string, error) {
	if root := os.Getenv("GOROOT"); root != "" {
		p := filepath.Join(root, "bin", "go")
		if _, err := os.Stat(p); err == nil {
			return p, nil
		}
	}
	p, err := exec.LookPath("go")
	if err != nil {
		return "", fmt.Errorf("find the go command to build kelvard: %w", err)
	}
	return p, nil
}
