package faults

import (
	"context"
	"database/sql"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	_ "github.com/jackc/pgx/v5/stdlib" // database/sql driver "pgx" to make the test database

	"kelvard/store/storetest"
)

// pgCluster is a PostgreSQL cluster made for one test with Debian's
// postgresql-common tools, so the test can stop and start it without
// disturbing the server other tests share.
type pgCluster struct {
	version string
	name    string
	port    int
}

// clusterPrefix starts the name of every cluster these tests make; a
// cluster whose creator process is gone is dropped by the next run.
const clusterPrefix = "kelvardfault_"

// newPGCluster makes and starts a private cluster with trust
// authentication and a `test` database, dropped when the test ends. It
// needs root and the postgresql-common tools; without them it skips,
// or fails when KELVARD_TEST_REQUIRE_POSTGRES is set (CI).
func newPGCluster(t *testing.T) *pgCluster {
	t.Helper()
	version, why := pgToolsReady()
	if why != "" {
		if storetest.RequirePostgres() {
			t.Fatalf("a private PostgreSQL cluster is required (KELVARD_TEST_REQUIRE_POSTGRES is set) but cannot be made: %s", why)
		}
		t.Skipf("cannot make a private PostgreSQL cluster, skipping (set KELVARD_TEST_REQUIRE_POSTGRES=1 to fail instead): %s", why)
	}
	dropAbandonedClusters(version)
	port, err := freePort()
	if err != nil {
		t.Fatal(err)
	}
	c := &pgCluster{version: version, name: clusterPrefix + strconv.Itoa(os.Getpid()), port: port}
	// A leftover of this very process id (a reused pid) goes first.
	_ = exec.Command("pg_dropcluster", "--stop", version, c.name).Run()
	c.run(t, "pg_createcluster", version, c.name, "-p", strconv.Itoa(port),
		"-o", "fsync=off", "-o", "max_connections=60", "-o", "shared_buffers=32MB",
		"--", "--auth-local=trust", "--auth-host=trust")
	t.Cleanup(func() {
		if out, err := exec.Command("pg_dropcluster", "--stop", c.version, c.name).CombinedOutput(); err != nil {
			t.Errorf("pg_dropcluster %s %s: %v\n%s", c.version, c.name, err, out)
		}
	})
	c.start(t)
	db, err := sql.Open("pgx", c.url("postgres"))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	if _, err := db.ExecContext(ctx, "CREATE DATABASE test"); err != nil {
		t.Fatalf("create database test in the private cluster: %v", err)
	}
	return c
}

// pgToolsReady reports the newest installed PostgreSQL version, or why a
// cluster cannot be made.
func pgToolsReady() (version, why string) {
	if os.Geteuid() != 0 {
		return "", "the tests do not run as root (pg_createcluster needs it)"
	}
	for _, tool := range []string{"pg_createcluster", "pg_ctlcluster", "pg_dropcluster"} {
		if _, err := exec.LookPath(tool); err != nil {
			return "", tool + " is not installed (Debian package postgresql-common)"
		}
	}
	entries, err := os.ReadDir("/etc/postgresql")
	if err != nil {
		return "", "no /etc/postgresql: " + err.Error()
	}
	var versions []int
	for _, e := range entries {
		if v, err := strconv.Atoi(e.Name()); err == nil && e.IsDir() {
			versions = append(versions, v)
		}
	}
	if len(versions) == 0 {
		return "", "no PostgreSQL version under /etc/postgresql"
	}
	sort.Ints(versions)
	return strconv.Itoa(versions[len(versions)-1]), ""
}

// dropAbandonedClusters drops clusters an earlier run made and could not
// drop (it was killed): those whose creator process no longer exists.
func dropAbandonedClusters(version string) {
	dirs, _ := filepath.Glob(filepath.Join("/etc/postgresql", version, clusterPrefix+"*"))
	for _, dir := range dirs {
		name := filepath.Base(dir)
		pid, err := strconv.Atoi(strings.TrimPrefix(name, clusterPrefix))
		if err != nil || pid == os.Getpid() || syscall.Kill(pid, 0) == nil {
			continue
		}
		_ = exec.Command("pg_dropcluster", "--stop", version, name).Run()
	}
}

// freePort finds a TCP port nothing listens on now.
func freePort() (int, error) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		return 0, fmt.Errorf("find a free port: %w", err)
	}
	defer ln.Close()
	return ln.Addr().(*net.TCPAddr).Port, nil
}

// url is the address of a database in the cluster.
func (c *pgCluster) url(db string) string {
	return fmt.Sprintf("postgres://postgres@127.0.0.1:%d/%s?sslmode=disable", c.port, db)
}

func (c *pgCluster) run(t *testing.T, name string, args ...string) {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	out, err := exec.CommandContext(ctx, name, args...).CombinedOutput()
	if err != nil {
		t.Fatalf("%s %s: %v\n%s", name, strings.Join(args, " "), err, out)
	}
}

// start starts the cluster and waits until it takes connections.
func (c *pgCluster) start(t *testing.T) {
	t.Helper()
	c.run(t, "pg_ctlcluster", "--skip-systemctl-redirect", c.version, c.name, "start")
	db, err := sql.Open("pgx", c.url("postgres"))
	if err != nil {
		t.Fatal(err)
	}
	defer db.Close()
	if !poll(60*time.Second, 100*time.Millisecond, func() bool {
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		return db.PingContext(ctx) == nil
	}) {
		t.Fatalf("private cluster on port %d does not take connections", c.port)
	}
}

// stop stops the cluster (fast shutdown: sessions are ended, open
// transactions roll back).
func (c *pgCluster) stop(t *testing.T) {
	t.Helper()
	c.run(t, "pg_ctlcluster", "--skip-systemctl-redirect", "--mode", "fast", c.version, c.name, "stop")
}
