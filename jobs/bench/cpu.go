package bench

import (
	"context"
	"database/sql"
	"fmt"
	"os"
	"strconv"
	"strings"
	"syscall"
	"time"
)

// CPU is processor time a phase used, split by who used it.
type CPU struct {
	// Client is this benchmark process: the HTTP sender, or the COPY
	// client encoding rows.
	Client time.Duration
	// Server is the kelvard server process (zero for COPY).
	Server time.Duration
	// Database is the PostgreSQL backends serving the phase's
	// connections. PostgreSQL's background writers are shared and left out.
	Database time.Duration
}

// Total is all the time.
func (c CPU) Total() time.Duration { return c.Client + c.Server + c.Database }

func (c *CPU) add(d CPU) {
	c.Client += d.Client
	c.Server += d.Server
	c.Database += d.Database
}

// cpuMeter takes snapshots of the processes a phase runs on.
type cpuMeter struct {
	db      *sql.DB
	appName string // application_name of the phase's database connections
	server  int    // kelvard server pid, 0 for none
}

// cpuSnapshot is the CPU time of each process at one moment.
type cpuSnapshot struct {
	client, server time.Duration
	backends       map[int]time.Duration
}

func (m cpuMeter) snapshot(ctx context.Context) (cpuSnapshot, error) {
	var s cpuSnapshot
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return s, fmt.Errorf("read own CPU time: %w", err)
	}
	s.client = time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
	if m.server > 0 {
		s.server = procCPU(m.server)
	}
	rows, err := m.db.QueryContext(ctx, "SELECT pid FROM pg_stat_activity WHERE application_name = $1", m.appName)
	if err != nil {
		return s, fmt.Errorf("list the phase's backends: %w", err)
	}
	defer rows.Close()
	s.backends = map[int]time.Duration{}
	for rows.Next() {
		var pid int
		if err := rows.Scan(&pid); err != nil {
			return s, err
		}
		s.backends[pid] = procCPU(pid)
	}
	return s, rows.Err()
}

// since returns the CPU used between an earlier snapshot and this one; a
// backend that appeared in between counts from zero.
func (s cpuSnapshot) since(before cpuSnapshot) CPU {
	c := CPU{Client: s.client - before.client, Server: s.server - before.server}
	for pid, t := range s.backends {
		c.Database += t - before.backends[pid]
	}
	return c
}

// procCPU returns a process's user and system time from /proc/PID/stat
// (fields 14 and 15, in clock ticks of 1/100 s on Linux), or 0 when it
// cannot be read.
func procCPU(pid int) time.Duration {
	b, err := os.ReadFile(fmt.Sprintf("/proc/%d/stat", pid))
	if err != nil {
		return 0
	}
	rest := string(b)
	if i := strings.LastIndexByte(rest, ')'); i >= 0 && i+2 < len(rest) {
		rest = rest[i+2:]
	}
	f := strings.Fields(rest)
	if len(f) < 13 {
		return 0
	}
	ut, _ := strconv.ParseInt(f[11], 10, 64)
	st, _ := strconv.ParseInt(f[12], 10, 64)
	return time.Duration(ut+st) * 10 * time.Millisecond
}
