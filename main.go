// Command kelvard is a fleet register and health-tracking server for
// variable-frequency drives. Run `kelvard help` for the commands.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"os/signal"
	"runtime/debug"
	"strings"
	"syscall"
	"text/tabwriter"
	"time"
	_ "time/tzdata" // site time zones validate on hosts without a zone database

	"github.com/mattn/go-isatty"

	"kelvard/api"
	"kelvard/store"
)

// version is set at build time with -ldflags "-X main.version=…".
var version = ""

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Getenv, os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

const usage = `kelvard: fleet register and health tracking for variable-frequency drives

Usage: kelvard <command> [flags]

Commands:
  serve     run the HTTP server (API, pages, metrics, scheduled jobs)
  migrate   apply database migrations and exit
  token     make, list and revoke API tokens
  bench     measure the server on this machine (bench ingest)
  version   print the version

Every flag can also be set by an environment variable named in its help,
for example KELVARD_DATABASE_URL. Run "kelvard <command> -h" for its flags.
`

// run is the whole program apart from process exit, so tests can start it
// with their own arguments, environment and output.
func run(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return 2
	}
	cmd, rest := args[0], args[1:]
	var err error
	switch cmd {
	case "serve":
		err = cmdServe(ctx, rest, getenv, stdout, stderr)
	case "migrate":
		err = cmdMigrate(ctx, rest, getenv, stdout, stderr)
	case "token":
		err = cmdToken(ctx, rest, getenv, stdout, stderr)
	case "bench":
		err = cmdBench(ctx, rest, getenv, stdout, stderr)
	case "version":
		fmt.Fprintln(stdout, "kelvard", buildVersion())
	case "help", "-h", "--help":
		fmt.Fprint(stdout, usage)
	default:
		fmt.Fprintf(stderr, "kelvard: unknown command %q\n\n%s", cmd, usage)
		return 2
	}
	if errors.Is(err, flag.ErrHelp) {
		return 0
	}
	var ue usageError
	if errors.As(err, &ue) {
		fmt.Fprintln(stderr, "kelvard:", err)
		return 2
	}
	if err != nil {
		fmt.Fprintln(stderr, "kelvard:", err)
		return 1
	}
	return 0
}

// usageError is a mistake on the command line (exit status 2).
type usageError struct{ error }

// common holds the flags every command takes.
type common struct {
	databaseURL string
	logLevel    string
	logFormat   string
}

// newFlags makes a flag set with the common flags, their defaults taken
// from the environment.
func newFlags(name string, getenv func(string) string, stderr io.Writer) (*flag.FlagSet, *common) {
	fs := flag.NewFlagSet("kelvard "+name, flag.ContinueOnError)
	fs.SetOutput(stderr)
	c := &common{}
	fs.StringVar(&c.databaseURL, "database-url", getenv("KELVARD_DATABASE_URL"),
		"postgres://… for PostgreSQL; sqlite:PATH or empty for the embedded file ./kelvard.db (KELVARD_DATABASE_URL)")
	fs.StringVar(&c.logLevel, "log-level", envOr(getenv, "KELVARD_LOG_LEVEL", "info"), "debug, info, warn or error (KELVARD_LOG_LEVEL)")
	fs.StringVar(&c.logFormat, "log-format", envOr(getenv, "KELVARD_LOG_FORMAT", "auto"),
		"json, text, or auto (text on a terminal, JSON otherwise) (KELVARD_LOG_FORMAT)")
	return fs, c
}

func envOr(getenv func(string) string, key, def string) string {
	if v := getenv(key); v != "" {
		return v
	}
	return def
}

// parse parses flags and refuses stray arguments.
func parse(fs *flag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return usageError{err}
	}
	if fs.NArg() > 0 {
		return usageError{fmt.Errorf("unexpected argument %q", fs.Arg(0))}
	}
	return nil
}

// logger builds the process logger: JSON when stderr is not a terminal.
func (c *common) logger(stderr io.Writer) (*slog.Logger, error) {
	var level slog.Level
	if err := level.UnmarshalText([]byte(c.logLevel)); err != nil {
		return nil, usageError{fmt.Errorf("--log-level %q: want debug, info, warn or error", c.logLevel)}
	}
	opts := &slog.HandlerOptions{Level: level}
	format := c.logFormat
	if format == "auto" {
		format = "json"
		if f, ok := stderr.(*os.File); ok && isatty.IsTerminal(f.Fd()) {
			format = "text"
		}
	}
	switch format {
	case "json":
		return slog.New(slog.NewJSONHandler(stderr, opts)), nil
	case "text":
		return slog.New(slog.NewTextHandler(stderr, opts)), nil
	}
	return nil, usageError{fmt.Errorf("--log-format %q: want json, text or auto", c.logFormat)}
}

// open connects to the configured store and applies migrations.
func (c *common) open(ctx context.Context, log *slog.Logger) (*store.Store, error) {
	st, err := store.Open(ctx, c.databaseURL, store.Options{Logger: log})
	if err != nil {
		return nil, err
	}
	v, err := st.Migrate(ctx)
	if err != nil {
		st.Close()
		return nil, err
	}
	if err := st.PrepareReadingPartitions(ctx); err != nil {
		st.Close()
		return nil, err
	}
	log.Info("database ready", slog.String("dialect", string(st.Dialect())), slog.Int64("schema_version", v))
	return st, nil
}

func cmdServe(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	fs, c := newFlags("serve", getenv, stderr)
	listen := fs.String("listen", envOr(getenv, "KELVARD_LISTEN", ":8080"), "address to listen on (KELVARD_LISTEN)")
	bootstrap := fs.String("bootstrap-token", getenv("KELVARD_BOOTSTRAP_TOKEN"),
		"becomes an admin token when the store holds none (KELVARD_BOOTSTRAP_TOKEN); make one with `kelvard token new-secret`")
	proxies := fs.String("trusted-proxies", getenv("KELVARD_TRUSTED_PROXIES"), "comma-separated proxy addresses or CIDRs whose X-Forwarded-For is trusted (KELVARD_TRUSTED_PROXIES)")
	limits, err := ingestLimitFlags(fs, getenv)
	if err != nil {
		return err
	}
	if err := parse(fs, args); err != nil {
		return err
	}
	log, err := c.logger(stderr)
	if err != nil {
		return err
	}
	st, err := c.open(ctx, log)
	if err != nil {
		return err
	}
	defer st.Close()
	if *bootstrap != "" {
		made, err := st.Bootstrap(ctx, *bootstrap)
		if err != nil {
			return err
		}
		if made {
			log.Info("bootstrap admin token registered")
		}
	}
	srv, err := api.New(api.Config{Version: buildVersion(), TrustedProxies: splitList(*proxies),
		MaxIngestBytes: limits.bytes, MaxIngestRows: limits.rows}, st, log)
	if err != nil {
		return err
	}
	ln, err := net.Listen("tcp", *listen)
	if err != nil {
		return fmt.Errorf("listen on %s: %w", *listen, err)
	}
	hs := srv.HTTPServer(*listen)
	fmt.Fprintf(stdout, "kelvard %s serving on http://%s (%s store)\n", buildVersion(), displayAddr(ln.Addr()), st.Dialect())
	errc := make(chan error, 1)
	go func() { errc <- hs.Serve(ln) }()
	select {
	case err := <-errc:
		return fmt.Errorf("serve: %w", err)
	case <-ctx.Done():
	}
	log.Info("shutting down: finishing requests in flight")
	shutCtx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	if err := hs.Shutdown(shutCtx); err != nil {
		return fmt.Errorf("shutdown: %w", err)
	}
	if err := <-errc; err != nil && !errors.Is(err, http.ErrServerClosed) {
		return fmt.Errorf("serve: %w", err)
	}
	return nil
}

// displayAddr turns a listener address into one a browser can open.
func displayAddr(a net.Addr) string {
	tcp, ok := a.(*net.TCPAddr)
	if !ok || tcp.IP.IsUnspecified() {
		if ok {
			return fmt.Sprintf("localhost:%d", tcp.Port)
		}
		return a.String()
	}
	return tcp.String()
}

func splitList(s string) []string {
	var out []string
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

func cmdMigrate(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	fs, c := newFlags("migrate", getenv, stderr)
	if err := parse(fs, args); err != nil {
		return err
	}
	log, err := c.logger(stderr)
	if err != nil {
		return err
	}
	st, err := c.open(ctx, log)
	if err != nil {
		return err
	}
	defer st.Close()
	fmt.Fprintf(stdout, "migrations applied (%s store)\n", st.Dialect())
	return nil
}

func cmdToken(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	const tokenUsage = "usage: kelvard token create --role ROLE --name NAME [--sites 1,2] [--expires 720h] | list | revoke ID | new-secret"
	if len(args) == 0 {
		return usageError{errors.New(tokenUsage)}
	}
	sub, rest := args[0], args[1:]
	if sub == "new-secret" {
		secret, err := store.NewSecret()
		if err != nil {
			return err
		}
		fmt.Fprintln(stdout, secret)
		return nil
	}
	fs, c := newFlags("token "+sub, getenv, stderr)
	var (
		role, name, sites string
		expires           time.Duration
	)
	switch sub {
	case "create":
		fs.StringVar(&role, "role", "", "viewer, ingest, planner or admin")
		fs.StringVar(&name, "name", "", "who or what holds the token")
		fs.StringVar(&sites, "sites", "", "comma-separated site ids the token is limited to (default: every site)")
		fs.DurationVar(&expires, "expires", 0, "lifetime, e.g. 720h (default: no expiry)")
	case "list", "revoke":
	default:
		return usageError{errors.New(tokenUsage)}
	}
	if err := fs.Parse(rest); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return err
		}
		return usageError{err}
	}
	log, err := c.logger(stderr)
	if err != nil {
		return err
	}
	st, err := c.open(ctx, log)
	if err != nil {
		return err
	}
	defer st.Close()
	switch sub {
	case "create":
		if fs.NArg() > 0 {
			return usageError{fmt.Errorf("unexpected argument %q", fs.Arg(0))}
		}
		n := store.NewToken{Name: name, Role: store.Role(role)}
		for _, s := range splitList(sites) {
			var id int64
			if _, err := fmt.Sscan(s, &id); err != nil {
				return usageError{fmt.Errorf("--sites: %q is not a site id", s)}
			}
			n.Sites = append(n.Sites, id)
		}
		if expires > 0 {
			at := time.Now().Add(expires)
			n.ExpiresAt = &at
		}
		t, secret, err := st.CreateToken(ctx, n)
		if err != nil {
			return err
		}
		fmt.Fprintf(stderr, "token %d (%s, %s) made; the secret below is shown once:\n", t.ID, t.Name, t.Role)
		fmt.Fprintln(stdout, secret)
	case "list":
		ts, err := st.Tokens(ctx)
		if err != nil {
			return err
		}
		w := tabwriter.NewWriter(stdout, 0, 4, 2, ' ', 0)
		fmt.Fprintln(w, "ID\tNAME\tROLE\tSITES\tEXPIRES\tREVOKED\tLAST USED")
		for _, t := range ts {
			fmt.Fprintf(w, "%d\t%s\t%s\t%s\t%s\t%s\t%s\n", t.ID, t.Name, t.Role, sitesText(t.Sites), timeText(t.ExpiresAt), timeText(t.RevokedAt), timeText(t.LastUsedAt))
		}
		return w.Flush()
	case "revoke":
		if fs.NArg() != 1 {
			return usageError{errors.New("usage: kelvard token revoke ID")}
		}
		var id int64
		if _, err := fmt.Sscan(fs.Arg(0), &id); err != nil {
			return usageError{fmt.Errorf("%q is not a token id", fs.Arg(0))}
		}
		if _, err := st.RevokeToken(ctx, id); err != nil {
			return err
		}
		fmt.Fprintf(stdout, "token %d revoked\n", id)
	}
	return nil
}

func sitesText(ids []int64) string {
	if len(ids) == 0 {
		return "all"
	}
	parts := make([]string, len(ids))
	for i, id := range ids {
		parts[i] = fmt.Sprint(id)
	}
	return strings.Join(parts, ",")
}

func timeText(t *time.Time) string {
	if t == nil {
		return "-"
	}
	return t.UTC().Format(time.RFC3339)
}

// buildVersion reports the version set at build time, else the module
// version or VCS revision the Go toolchain recorded.
func buildVersion() string {
	if version != "" {
		return version
	}
	if bi, ok := debug.ReadBuildInfo(); ok {
		if bi.Main.Version != "" && bi.Main.Version != "(devel)" {
			return bi.Main.Version
		}
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" && len(s.Value) >= 12 {
				return "dev-" + s.Value[:12]
			}
		}
	}
	return "dev"
}
