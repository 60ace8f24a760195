package faults

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"io"
	"net/http"
	"os"
	"os/exec"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

// Bounds of the waits on a child process: generous, because a loaded
// two-core machine runs the whole suite beside these tests.
const (
	startTimeout = 60 * time.Second
	exitTimeout  = 60 * time.Second
)

// syncBuffer collects a child's output for the test to read while the
// child writes.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// server is one `kelvard serve` child process.
type server struct {
	cmd    *exec.Cmd
	base   string // http://127.0.0.1:PORT
	stdout *syncBuffer
	stderr *syncBuffer
	// exited is closed when the process has been waited for; exitErr is
	// Wait's answer.
	exited  chan struct{}
	exitErr error
}

var addrRE = regexp.MustCompile(`serving on (http://\S+)`)

// childEnv is the test's environment without any KELVARD_ setting, plus
// env: the child sees only the settings the test gives it.
func childEnv(env map[string]string) []string {
	var out []string
	for _, kv := range os.Environ() {
		if !strings.HasPrefix(kv, "KELVARD_") {
			out = append(out, kv)
		}
	}
	vars := map[string]string{"KELVARD_LOG_FORMAT": "json", "KELVARD_LOG_LEVEL": "warn"}
	for k, v := range env {
		vars[k] = v
	}
	for k, v := range vars {
		out = append(out, k+"="+v)
	}
	return out
}

// startServer starts `kelvard serve --listen 127.0.0.1:0 ARGS` with env and
// waits until it prints its address. The process is killed at the end of
// the test if it is still running.
func startServer(t *testing.T, env map[string]string, args ...string) *server {
	t.Helper()
	s := &server{stdout: &syncBuffer{}, stderr: &syncBuffer{}, exited: make(chan struct{})}
	s.cmd = exec.Command(kelvardBin, append([]string{"serve", "--listen", "127.0.0.1:0"}, args...)...)
	s.cmd.Env = childEnv(env)
	s.cmd.Stderr = s.stderr
	pipe, err := s.cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := s.cmd.Start(); err != nil {
		t.Fatalf("start kelvard: %v", err)
	}
	addr := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(pipe)
		for sc.Scan() {
			line := sc.Text()
			s.stdout.Write([]byte(line + "\n"))
			if m := addrRE.FindStringSubmatch(line); m != nil {
				select {
				case addr <- m[1]:
				default:
				}
			}
		}
		_, _ = io.Copy(io.Discard, pipe)
		s.exitErr = s.cmd.Wait()
		close(s.exited)
	}()
	t.Cleanup(func() {
		if !s.hasExited() {
			_ = s.cmd.Process.Kill()
			<-s.exited
		}
		if t.Failed() {
			t.Logf("kelvard pid %d stderr (tail):\n%s", s.cmd.Process.Pid, tail(s.stderr.String(), 6000))
		}
	})
	select {
	case s.base = <-addr:
	case <-s.exited:
		t.Fatalf("kelvard serve exited before listening (%v):\n%s", s.exitErr, s.stderr.String())
	case <-time.After(startTimeout):
		t.Fatalf("kelvard serve printed no address within %v:\n%s", startTimeout, s.stderr.String())
	}
	return s
}

func tail(s string, n int) string {
	if len(s) <= n {
		return s
	}
	return "…" + s[len(s)-n:]
}

func (s *server) hasExited() bool {
	select {
	case <-s.exited:
		return true
	default:
		return false
	}
}

// kill9 kills the process with SIGKILL and waits for it.
func (s *server) kill9(t *testing.T) {
	t.Helper()
	if err := s.cmd.Process.Signal(syscall.SIGKILL); err != nil && !s.hasExited() {
		t.Fatalf("kill -9: %v", err)
	}
	s.wait(t)
}

// terminate sends SIGTERM and returns the exit code.
func (s *server) terminate(t *testing.T) int {
	t.Helper()
	if err := s.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatalf("SIGTERM: %v", err)
	}
	return s.wait(t)
}

// wait waits for the process to exit and returns its exit code (-1 when
// a signal ended it).
func (s *server) wait(t *testing.T) int {
	t.Helper()
	select {
	case <-s.exited:
	case <-time.After(exitTimeout):
		t.Fatalf("kelvard did not exit within %v:\n%s", exitTimeout, tail(s.stderr.String(), 4000))
	}
	var ee *exec.ExitError
	switch {
	case s.exitErr == nil:
		return 0
	case errors.As(s.exitErr, &ee):
		return ee.ExitCode()
	}
	t.Fatalf("wait for kelvard: %v", s.exitErr)
	return -1
}

// readyz asks /readyz once and returns its status (0 when it cannot be
// asked) and body.
func (s *server) readyz(ctx context.Context) (int, []byte) {
	ctx, cancel := context.WithTimeout(ctx, 10*time.Second)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, s.base+"/readyz", nil)
	if err != nil {
		return 0, nil
	}
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		return 0, nil
	}
	defer resp.Body.Close()
	b, _ := io.ReadAll(resp.Body)
	return resp.StatusCode, b
}

// waitReadyz polls /readyz until it answers want, within timeout.
func (s *server) waitReadyz(t *testing.T, want int, timeout time.Duration) []byte {
	t.Helper()
	var (
		code int
		body []byte
	)
	ok := poll(timeout, 50*time.Millisecond, func() bool {
		code, body = s.readyz(context.Background())
		return code == want || s.hasExited()
	})
	if s.hasExited() {
		t.Fatalf("kelvard exited while waiting for /readyz %d (%v):\n%s", want, s.exitErr, tail(s.stderr.String(), 4000))
	}
	if !ok {
		t.Fatalf("/readyz did not answer %d within %v: last %d %s", want, timeout, code, body)
	}
	return body
}

// poll calls cond every interval until it holds or timeout passes, and
// reports whether it held.
func poll(timeout, interval time.Duration, cond func() bool) bool {
	deadline := time.Now().Add(timeout)
	for {
		if cond() {
			return true
		}
		if time.Now().After(deadline) {
			return false
		}
		time.Sleep(interval)
	}
}
