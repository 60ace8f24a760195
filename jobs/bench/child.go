package bench

import (
	"bufio"
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"net/http"
	"os"
	"os/exec"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"time"
)

// server is a `kelvard serve` child process.
type server struct {
	cmd    *exec.Cmd
	base   string
	stderr *tailBuffer
	done   chan error
	// stopped holds the outcome of the first stop; later calls return it.
	stopOnce sync.Once
	stopErr  error
}

var servingRE = regexp.MustCompile(`serving on (http://\S+)`)

// startServer runs exe serve on a free loopback port with env added to
// this process's environment, and waits until /readyz answers 200.
func startServer(ctx context.Context, exe string, env []string) (*server, error) {
	cmd := exec.Command(exe, "serve", "--listen", "127.0.0.1:0")
	cmd.Env = append(os.Environ(), env...)
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		return nil, err
	}
	s := &server{cmd: cmd, stderr: &tailBuffer{max: 16 << 10}, done: make(chan error, 1)}
	cmd.Stderr = s.stderr
	if err := cmd.Start(); err != nil {
		return nil, fmt.Errorf("start %s serve: %w", exe, err)
	}
	addr := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stdout)
		for sc.Scan() {
			if m := servingRE.FindStringSubmatch(sc.Text()); m != nil {
				addr <- m[1]
			}
		}
		io.Copy(io.Discard, stdout)
	}()
	go func() { s.done <- cmd.Wait() }()
	deadline := time.NewTimer(60 * time.Second)
	defer deadline.Stop()
	select {
	case s.base = <-addr:
	case err := <-s.done:
		return nil, fmt.Errorf("server exited before serving (%v): %s", err, s.stderr)
	case <-deadline.C:
		s.stop()
		return nil, fmt.Errorf("server printed no address within a minute: %s", s.stderr)
	case <-ctx.Done():
		s.stop()
		return nil, ctx.Err()
	}
	for {
		resp, err := http.Get(s.base + "/readyz")
		if err == nil {
			resp.Body.Close()
			if resp.StatusCode == http.StatusOK {
				return s, nil
			}
		}
		select {
		case err := <-s.done:
			return nil, fmt.Errorf("server exited before it was ready (%v): %s", err, s.stderr)
		case <-deadline.C:
			s.stop()
			return nil, fmt.Errorf("server not ready within a minute: %s", s.stderr)
		case <-ctx.Done():
			s.stop()
			return nil, ctx.Err()
		case <-time.After(50 * time.Millisecond):
		}
	}
}

// stop asks the server to shut down (SIGTERM) and waits for it, killing
// it after 30 seconds. Later calls return the first call's outcome.
func (s *server) stop() error {
	s.stopOnce.Do(func() { s.stopErr = s.terminate() })
	return s.stopErr
}

func (s *server) terminate() error {
	if err := s.cmd.Process.Signal(syscall.SIGTERM); err != nil && !errors.Is(err, os.ErrProcessDone) {
		return fmt.Errorf("stop server: %w", err)
	}
	select {
	case err := <-s.done:
		if err != nil {
			return fmt.Errorf("server exited with %v: %s", err, s.stderr)
		}
		return nil
	case <-time.After(30 * time.Second):
		s.cmd.Process.Kill()
		<-s.done
		return errors.New("server did not stop within 30 s and was killed")
	}
}

// peakRSS reads the server's peak resident set size (VmHWM) in bytes.
func (s *server) peakRSS() (int64, error) {
	status, err := os.ReadFile(fmt.Sprintf("/proc/%d/status", s.cmd.Process.Pid))
	if err != nil {
		return 0, fmt.Errorf("read server status: %w", err)
	}
	for _, line := range strings.Split(string(status), "\n") {
		if v, ok := strings.CutPrefix(line, "VmHWM:"); ok {
			f := strings.Fields(v)
			if len(f) == 2 && f[1] == "kB" {
				if kb, err := strconv.ParseInt(f[0], 10, 64); err == nil {
					return kb << 10, nil
				}
			}
		}
	}
	return 0, errors.New("server status shows no VmHWM")
}

// tailBuffer keeps the last max bytes written to it.
type tailBuffer struct {
	mu  sync.Mutex
	buf bytes.Buffer
	max int
}

func (t *tailBuffer) Write(p []byte) (int, error) {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.buf.Write(p)
	if over := t.buf.Len() - t.max; over > 0 {
		t.buf.Next(over)
	}
	return len(p), nil
}

func (t *tailBuffer) String() string {
	t.mu.Lock()
	defer t.mu.Unlock()
	return strings.TrimSpace(t.buf.String())
}
