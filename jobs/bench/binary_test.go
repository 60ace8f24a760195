package bench_test

import (
	"os"
	"os/exec"
	"path/filepath"
	"sync"
	"testing"

	"kelvard/store"
	"kelvard/store/storetest"
)

var binary struct {
	once sync.Once
	path string
	err  error
	out  []byte
}

// kelvardBinary needs PostgreSQL (it skips, or fails under CI, without
// it) and returns the kelvard binary the benchmarks start as their server,
// built once for the package's tests.
func kelvardBinary(t *testing.T) string {
	t.Helper()
	storetest.URL(t, store.Postgres)
	binary.once.Do(func() {
		goTool, err := exec.LookPath("go")
		if err != nil {
			binary.err = err
			return
		}
		dir, err := os.MkdirTemp("", "kelvard-bench-test-")
		if err != nil {
			binary.err = err
			return
		}
		binary.path = filepath.Join(dir, "kelvard")
		binary.out, binary.err = exec.Command(goTool, "build", "-o", binary.path, "kelvard").CombinedOutput()
	})
	if binary.err != nil {
		t.Fatalf("build kelvard: %v\n%s", binary.err, binary.out)
	}
	return binary.path
}

func TestMain(m *testing.M) {
	code := m.Run()
	if binary.path != "" {
		os.RemoveAll(filepath.Dir(binary.path))
	}
	os.Exit(code)
}
