package bench

import (
	"context"
	"database/sql"
	"fmt"
	"os"
	"runtime"
	"strings"
)

// Machine describes where a benchmark ran.
type Machine struct {
	CPUs      int
	CPUModel  string
	GoVersion string
	// LoadAverage is /proc/loadavg's one-minute figure when the run
	// started; other work on the machine slows every rate.
	LoadAverage string
	// PostgreSQL is the database server's version, where a benchmark
	// reads it (empty otherwise).
	PostgreSQL string
}

func thisMachine() Machine {
	m := Machine{CPUs: runtime.NumCPU(), GoVersion: runtime.Version(), CPUModel: "unknown", LoadAverage: loadAverage()}
	if b, err := os.ReadFile("/proc/cpuinfo"); err == nil {
		for _, line := range strings.Split(string(b), "\n") {
			if k, v, ok := strings.Cut(line, ":"); ok && strings.TrimSpace(k) == "model name" {
				m.CPUModel = strings.TrimSpace(v)
				break
			}
		}
	}
	return m
}

// loadAverage returns the one-minute load average, or "unknown".
func loadAverage() string {
	b, err := os.ReadFile("/proc/loadavg")
	if err != nil {
		return "unknown"
	}
	if f := strings.Fields(string(b)); len(f) > 0 {
		return f[0]
	}
	return "unknown"
}

// postgresVersion asks the database server for its version.
func postgresVersion(ctx context.Context, db *sql.DB) (string, error) {
	var v string
	if err := db.QueryRowContext(ctx, "SHOW server_version").Scan(&v); err != nil {
		return "", fmt.Errorf("read the PostgreSQL version: %w", err)
	}
	return "PostgreSQL " + v, nil
}

// verdict words whether a target was met, for the reports.
func verdict(ok bool) string {
	if ok {
		return "met"
	}
	return "NOT met"
}
