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
	"strconv"
	"strings"
	"syscall"
	"text/tabwriter"
	"time"
	_ "time/tzdata" // site time zones validate on hosts without a zone database

	"github.com/mattn/go-isatty"

	"kelvard/api"
	"kelvard/jobs"
	"kelvard/jobs/bench"
	"kelvard/jobs/plan"
	"kelvard/jobs/progress"
	"kelvard/store"
	"kelvard/store/csvio"
	splan "kelvard/store/plan"
	"kelvard/web"
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
  backup    copy the embedded SQLite store to a new file while it runs: backup FILE
  import    import a register CSV file: import KIND FILE [--partial]
  token     make, list and revoke API tokens
  assess    run one assessment now (--full recomputes every drive)
  bench     measure the server on this machine (bench ingest, bench assess, bench load)
  plan      print the replacement forecast, fleet reliability with spares, and open
            work orders: plan [forecast|reliability|work-orders] --format table|csv|json
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
		err = cmdServe(ctx, rest, getenv, stdout, stderr, builtinJobs)
	case "migrate":
		err = cmdMigrate(ctx, rest, getenv, stdout, stderr)
	case "backup":
		err = cmdBackup(ctx, rest, getenv, stdout, stderr)
	case "token":
		err = cmdToken(ctx, rest, getenv, stdout, stderr)
	case "assess":
		err = cmdAssess(ctx, rest, getenv, stdout, stderr)
	case "import":
		err = cmdImport(ctx, rest, getenv, os.Stdin, stdout, stderr)
	case "bench":
		err = cmdBench(ctx, rest, getenv, stdout, stderr)
	case "plan":
		err = cmdPlan(ctx, rest, getenv, stdout, stderr)
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

// Garbage collector settings of serve, used unless the Go runtime's own
// GOGC and GOMEMLIMIT are set. Ingest allocates per batch and collects
// often at the runtime's default GOGC of 100. bench ingest --rounds 3 on 2
// CPUs, two runs each: server CPU per million CSV readings 1.67-1.77 s at
// 100 and 1.42-1.48 s at 400; CSV from 0.72-0.75 to 0.77-0.79 of COPY's
// rate; server peak RSS 126-149 MB instead of 55-86 MB. The soft memory
// limit makes the collector work harder before the heap gets near it, so
// the higher GOGC cannot run a replica out of memory.
const (
	serveGCPercent   = 400
	serveMemoryLimit = 512 << 20
)

// tuneGC applies serveGCPercent and serveMemoryLimit where the environment
// of the process does not set GOGC or GOMEMLIMIT.
func tuneGC(log *slog.Logger) {
	gogc, limit := "from GOGC", "from GOMEMLIMIT"
	if _, set := os.LookupEnv("GOGC"); !set {
		debug.SetGCPercent(serveGCPercent)
		gogc = strconv.Itoa(serveGCPercent)
	}
	if _, set := os.LookupEnv("GOMEMLIMIT"); !set {
		debug.SetMemoryLimit(serveMemoryLimit)
		limit = strconv.Itoa(serveMemoryLimit)
	}
	log.Debug("garbage collector", slog.String("gogc", gogc), slog.String("memory_limit_bytes", limit))
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

// openStore is open with the logger the flags ask for, for commands that
// log nothing of their own.
func (c *common) openStore(ctx context.Context, stderr io.Writer) (*store.Store, error) {
	log, err := c.logger(stderr)
	if err != nil {
		return nil, err
	}
	return c.open(ctx, log)
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

func cmdServe(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer, jobsFor jobSource) error {
	fs, c := newFlags("serve", getenv, stderr)
	jf := addJobFlags(fs, getenv)
	listen := fs.String("listen", envOr(getenv, "KELVARD_LISTEN", ":8080"), "address to listen on (KELVARD_LISTEN)")
	bootstrap := fs.String("bootstrap-token", getenv("KELVARD_BOOTSTRAP_TOKEN"),
		"becomes an admin token when the store holds none (KELVARD_BOOTSTRAP_TOKEN); make one with `kelvard token new-secret`")
	maxImport := fs.String("max-import-bytes", getenv("KELVARD_MAX_IMPORT_BYTES"), "largest CSV import body the API takes, in bytes (default 32 MiB) (KELVARD_MAX_IMPORT_BYTES)")
	proxies := fs.String("trusted-proxies", getenv("KELVARD_TRUSTED_PROXIES"), "comma-separated proxy addresses or CIDRs whose X-Forwarded-For is trusted (KELVARD_TRUSTED_PROXIES)")
	webhook := fs.String("webhook-url", getenv("KELVARD_WEBHOOK_URL"), "URL that new critical findings are posted to (KELVARD_WEBHOOK_URL)")
	webhookSecret := fs.String("webhook-secret", getenv("KELVARD_WEBHOOK_SECRET"), "key of the HMAC-SHA256 signature on webhook posts (KELVARD_WEBHOOK_SECRET)")
	metricsToken := fs.Bool("metrics-token", envOr(getenv, "KELVARD_METRICS_TOKEN", "false") == "true", "require a bearer token on /metrics (KELVARD_METRICS_TOKEN=true)")
	rawRetention := fs.Duration("raw-retention", envDuration(getenv, "KELVARD_RAW_RETENTION", 400*24*time.Hour),
		"how long raw readings are kept before they are rolled up into hourly aggregates; at least 100 days (KELVARD_RAW_RETENTION)")
	rateLimit := fs.Float64("rate-limit", envFloat(getenv, "KELVARD_RATE_LIMIT", 100),
		"requests per second each token may make on this replica; 0 turns the limit off (KELVARD_RATE_LIMIT)")
	secureCookies := fs.Bool("secure-cookies", envOr(getenv, "KELVARD_SECURE_COOKIES", "false") == "true",
		"mark page cookies Secure although requests arrive over plain HTTP, when TLS ends at a proxy in front (KELVARD_SECURE_COOKIES=true)")
	sessionKey := fs.String("session-key", getenv("KELVARD_SESSION_KEY"),
		"base64 key (32 bytes or more) signing page sessions; replicas must share it; empty makes one per process (KELVARD_SESSION_KEY)")
	demoFleet := fs.Bool("demo", false, "load an invented demo fleet into an empty store, assess it, and print an admin token")
	limits, err := ingestLimitFlags(fs, getenv)
	if err != nil {
		return err
	}
	if err := parse(fs, args); err != nil {
		return err
	}
	if *rawRetention < 100*24*time.Hour {
		return usageError{errors.New("--raw-retention must be at least 100 days (2400h): the assessment's window checks read 90 days of raw readings")}
	}
	if *webhook != "" && *webhookSecret == "" {
		return usageError{errors.New("--webhook-url needs --webhook-secret (KELVARD_WEBHOOK_SECRET) so receivers can check posts")}
	}
	importLimit, err := byteLimit("--max-import-bytes", *maxImport)
	if err != nil {
		return err
	}
	log, err := c.logger(stderr)
	if err != nil {
		return err
	}
	tuneGC(log)
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
	notifier := jobs.NewNotifier(st, *webhook, *webhookSecret, log)
	sched, err := jf.build(st, log, jobsFor(st, log, jobOptions{Notifier: notifier, RawRetention: *rawRetention}))
	if err != nil {
		return err
	}
	defer jf.stop(sched, log) // before the store closes: waits for a running job
	cfg := api.Config{Version: buildVersion(), TrustedProxies: splitList(*proxies), MaxImportBytes: importLimit, Jobs: sched,
		MetricsToken: *metricsToken, JobStats: jobStats(st), RateLimit: *rateLimit,
		MaxIngestBytes: limits.bytes, MaxIngestRows: limits.rows}
	var demoToken string
	if *demoFleet {
		t, secret, err := st.CreateToken(ctx, store.NewToken{Name: "demo admin", Role: store.RoleAdmin})
		if err != nil {
			return err
		}
		demoToken = secret
		log.Info("demo admin token made", slog.Int64("token", t.ID))
		cfg.Ready = jobs.StartDemo(ctx, st, sched, time.Now(), log).Ready
	}
	key, err := web.ParseSessionKey(*sessionKey)
	if err != nil {
		return usageError{err}
	}
	if cfg.Pages, err = web.New(st, web.Config{SecureCookies: *secureCookies, SessionKey: key, Log: log}); err != nil {
		return err
	}
	srv, err := api.New(cfg, st, log)
	if err != nil {
		return err
	}
	if err := jf.start(sched, log); err != nil {
		return err
	}
	if notifier != nil {
		// Retries of failed webhook posts; new findings are posted right
		// after each assessment.
		go notifier.Run(ctx, 30*time.Second)
	}
	ln, err := net.Listen("tcp", *listen)
	if err != nil {
		return fmt.Errorf("listen on %s: %w", *listen, err)
	}
	hs := srv.HTTPServer(*listen)
	fmt.Fprintf(stdout, "kelvard %s serving on http://%s (%s store)\n", buildVersion(), displayAddr(ln.Addr()), st.Dialect())
	if demoToken != "" {
		fmt.Fprintf(stdout, "demo fleet: loading, assessing and planning in the background; /readyz turns ready when done\n")
		fmt.Fprintf(stdout, "admin token (shown once): %s\n", demoToken)
	}
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

func cmdAssess(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	fs, c := newFlags("assess", getenv, stderr)
	full := fs.Bool("full", false, "recompute every drive from its components' start instead of taking in only new readings")
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
	a := jobs.NewAssessor(st, jobs.AssessConfig{Log: log})
	sched, err := jobs.New(jobs.Config{Store: st, Jobs: []jobs.Job{jobs.AssessJob{Assessor: a, Full: *full}}, Logger: log})
	if err != nil {
		return err
	}
	bar := progress.New(stderr, "assess", progress.Auto)
	run, err := sched.Run(ctx, jobs.Assess, bar.Update)
	bar.Finish()
	if err != nil {
		return err
	}
	fmt.Fprintf(stdout, "assessment %s: %s\n", run.Status, run.Note)
	if run.Status != store.JobSucceeded {
		return fmt.Errorf("assessment failed: %s", run.Error)
	}
	return nil
}

func cmdMigrate(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	fs, c := newFlags("migrate", getenv, stderr)
	if err := parse(fs, args); err != nil {
		return err
	}
	st, err := c.openStore(ctx, stderr)
	if err != nil {
		return err
	}
	defer st.Close()
	fmt.Fprintf(stdout, "migrations applied (%s store)\n", st.Dialect())
	return nil
}

// cmdBackup copies the embedded store to a new file (store.BackupTo); a
// PostgreSQL store is backed up with pg_dump instead.
func cmdBackup(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	fs, c := newFlags("backup", getenv, stderr)
	var file string
	if len(args) > 0 && !strings.HasPrefix(args[0], "-") {
		file, args = args[0], args[1:]
	}
	if err := parse(fs, args); err != nil {
		return err
	}
	if file == "" {
		return usageError{errors.New("usage: kelvard backup FILE [flags] (the embedded SQLite store; FILE must not exist)")}
	}
	st, err := c.openStore(ctx, stderr)
	if err != nil {
		return err
	}
	defer st.Close()
	if err := st.BackupTo(ctx, file); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "backup written to %s\n", file)
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
	st, err := c.openStore(ctx, stderr)
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

const importUsage = "usage: kelvard import KIND FILE [--partial]   (FILE - reads standard input; KIND is one of sites, areas, models, positions, drives, installations, components, events, readings)"

// cmdImport imports a register CSV file: kelvard import KIND FILE
// [--partial]. Flags may come before or after the two arguments.
func cmdImport(ctx context.Context, args []string, getenv func(string) string, stdin io.Reader, stdout, stderr io.Writer) error {
	fs, c := newFlags("import", getenv, stderr)
	partial := fs.Bool("partial", false, "write the good rows and list the bad ones (default: one bad row writes nothing)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, importUsage)
		fs.PrintDefaults()
	}
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				return err
			}
			return usageError{err}
		}
		if fs.NArg() == 0 {
			break
		}
		pos, args = append(pos, fs.Arg(0)), fs.Args()[1:]
	}
	if len(pos) != 2 {
		return usageError{errors.New(importUsage)}
	}
	kind, err := csvio.ParseKind(pos[0])
	if err != nil {
		return usageError{err}
	}
	in, size := stdin, int64(0)
	if pos[1] != "-" {
		f, err := os.Open(pos[1])
		if err != nil {
			return err
		}
		defer f.Close()
		if fi, err := f.Stat(); err == nil {
			size = fi.Size()
		}
		in = f
	}
	st, err := c.openStore(ctx, stderr)
	if err != nil {
		return err
	}
	defer st.Close()
	progress := csvio.NewProgressPrinter(stderr, "import "+string(kind))
	res, err := csvio.Import(ctx, st, kind, in, csvio.Options{Partial: *partial, Size: size, Progress: progress.Report})
	progress.Finish()
	csvio.WriteSummary(stdout, res, err)
	var ve *store.ValidationError
	if errors.As(err, &ve) {
		return fmt.Errorf("import %s: nothing was written; fix the rows above or use --partial", kind)
	}
	return err
}

// byteLimit reads a size in bytes given by a flag or its environment
// variable; empty means the default (0).
func byteLimit(name, s string) (int64, error) {
	if s == "" {
		return 0, nil
	}
	n, err := strconv.ParseInt(s, 10, 64)
	if err != nil || n <= 0 {
		return 0, usageError{fmt.Errorf("%s %q: want a positive number of bytes", name, s)}
	}
	return n, nil
}

// jobSource builds the jobs `serve` runs, over the opened store; n posts
// new critical findings to the webhook (nil when none is configured).
type jobSource func(st *store.Store, log *slog.Logger, o jobOptions) []jobs.Job

// jobOptions carries serve's settings for the jobs.
type jobOptions struct {
	// Notifier posts new critical findings (nil without a webhook).
	Notifier *jobs.Notifier
	// RawRetention is how long raw readings are kept before roll-up.
	RawRetention time.Duration
}

// builtinJobs lists kelvard's jobs over the opened store. A job named in
// jobs.DefaultSchedules takes that schedule unless its flag sets another;
// any other job runs on request only.
func builtinJobs(st *store.Store, log *slog.Logger, o jobOptions) []jobs.Job {
	return []jobs.Job{
		jobs.AssessJob{Assessor: jobs.NewAssessor(st, jobs.AssessConfig{Log: log, Notify: o.Notifier != nil}), Notifier: o.Notifier},
		jobs.NewRetentionJob(st, jobs.RetentionConfig{RawRetention: o.RawRetention, Log: log}),
		plan.Job{Store: st, Log: log},
	}
}

// cmdPlan wires `kelvard plan` to the planning package.
func cmdPlan(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	fs, c := newFlags("plan", getenv, stderr)
	opts := splan.AddFlags(fs)
	view, args := splan.SplitView(args)
	if err := parse(fs, args); err != nil {
		return err
	}
	if err := opts.Check(view); err != nil {
		return usageError{err}
	}
	st, err := c.openStore(ctx, stderr)
	if err != nil {
		return err
	}
	defer st.Close()
	return splan.Command(ctx, st, view, opts, stdout)
}

// jobFlags are serve's scheduler settings.
type jobFlags struct {
	scheduler   string
	schedules   map[string]*string
	staleAfter  time.Duration
	stopTimeout time.Duration
	// seconds lets schedules take a leading seconds field; test-only, set
	// by KELVARD_SCHEDULE_SECONDS=1 (no flag) so process-level tests need
	// not wait minutes for ticks.
	seconds bool
}

// addJobFlags registers the scheduler flags on fs, their defaults taken
// from the environment.
func addJobFlags(fs *flag.FlagSet, getenv func(string) string) *jobFlags {
	f := &jobFlags{schedules: map[string]*string{}, seconds: getenv("KELVARD_SCHEDULE_SECONDS") == "1"}
	fs.StringVar(&f.scheduler, "scheduler", envOr(getenv, "KELVARD_SCHEDULER", "on"),
		"on: this replica fires the job schedules; off: it serves manual runs only (KELVARD_SCHEDULER)")
	defaults := jobs.DefaultSchedules()
	for _, name := range []string{jobs.Assess, jobs.Plan, jobs.Retention} {
		env := "KELVARD_" + strings.ToUpper(name) + "_SCHEDULE"
		f.schedules[name] = fs.String(name+"-schedule", envOr(getenv, env, defaults[name]),
			fmt.Sprintf("cron expression (minute hour day month weekday, UTC) for the %s job, or off (%s)", name, env))
	}
	fs.DurationVar(&f.staleAfter, "job-stale-after", envDuration(getenv, "KELVARD_JOB_STALE_AFTER", 10*time.Minute),
		"a running job whose heartbeat is older is taken to have died with its replica (KELVARD_JOB_STALE_AFTER)")
	fs.DurationVar(&f.stopTimeout, "job-stop-timeout", envDuration(getenv, "KELVARD_JOB_STOP_TIMEOUT", 30*time.Second),
		"at shutdown, how long to wait for a running job before cancelling it (KELVARD_JOB_STOP_TIMEOUT)")
	return f
}

// jobStats reads each job's last run from the store for the job metrics,
// so every replica reports the same values.
func jobStats(st *store.Store) func(ctx context.Context) ([]api.JobStat, error) {
	return func(ctx context.Context) ([]api.JobStat, error) {
		stats, err := st.JobRunStats(ctx)
		if err != nil {
			return nil, err
		}
		out := make([]api.JobStat, 0, len(stats))
		for _, s := range stats {
			js := api.JobStat{Job: s.Job}
			if d, ok := s.LastDuration(); ok {
				js.LastDurationS = d.Seconds()
			}
			if s.LastSuccessAt != nil {
				js.LastSuccessUnix, js.HasSuccess = float64(s.LastSuccessAt.UnixNano())/1e9, true
			}
			out = append(out, js)
		}
		return out, nil
	}
}

// envFloat reads a number default from the environment; a value that does
// not parse is left for the flag package to report.
func envFloat(getenv func(string) string, key string, def float64) float64 {
	if v := getenv(key); v != "" {
		if f, err := strconv.ParseFloat(v, 64); err == nil {
			return f
		}
	}
	return def
}

// envDuration reads a duration default from the environment; a value that
// does not parse is left for the flag package to report.
func envDuration(getenv func(string) string, key string, def time.Duration) time.Duration {
	if v := getenv(key); v != "" {
		if d, err := time.ParseDuration(v); err == nil {
			return d
		}
	}
	return def
}

// build makes the scheduler over the jobs; it refuses bad settings as
// usage errors.
func (f *jobFlags) build(st *store.Store, log *slog.Logger, js []jobs.Job) (*jobs.Scheduler, error) {
	if f.scheduler != "on" && f.scheduler != "off" {
		return nil, usageError{fmt.Errorf("--scheduler %q: want on or off", f.scheduler)}
	}
	schedules := map[string]string{}
	for name, spec := range f.schedules {
		schedules[name] = *spec
	}
	s, err := jobs.New(jobs.Config{Store: st, Jobs: js, Schedules: schedules, StaleAfter: f.staleAfter, Seconds: f.seconds,
		Logger: log.With(slog.String("component", "jobs"))})
	if err != nil {
		return nil, usageError{err}
	}
	return s, nil
}

// start fires the schedules when the scheduler is on for this replica.
func (f *jobFlags) start(s *jobs.Scheduler, log *slog.Logger) error {
	if f.scheduler == "off" {
		log.Info("scheduler off on this replica: jobs run only on request", slog.Any("jobs", s.Names()))
		return nil
	}
	if len(s.Names()) == 0 {
		log.Info("scheduler on, no jobs registered")
	}
	return s.Start()
}

// stop stops the scheduler, waiting up to the stop timeout for a running
// job to finish.
func (f *jobFlags) stop(s *jobs.Scheduler, log *slog.Logger) {
	ctx, cancel := context.WithTimeout(context.Background(), f.stopTimeout)
	defer cancel()
	if err := s.Stop(ctx); err != nil {
		log.Error("stop jobs", slog.Any("err", err))
	}
}

// ingestLimits are the serve command's readings limits.
type ingestLimits struct {
	bytes int64
	rows  int
}

// ingestLimitFlags adds --max-ingest-bytes and --max-ingest-rows to fs,
// their defaults taken from KELVARD_MAX_INGEST_BYTES and
// KELVARD_MAX_INGEST_ROWS. The values are read when fs is parsed.
func ingestLimitFlags(fs *flag.FlagSet, getenv func(string) string) (*ingestLimits, error) {
	l := &ingestLimits{bytes: api.DefaultMaxIngestBytes, rows: api.DefaultMaxIngestRows}
	if v := getenv("KELVARD_MAX_INGEST_BYTES"); v != "" {
		n, err := strconv.ParseInt(v, 10, 64)
		if err != nil || n <= 0 {
			return nil, usageError{fmt.Errorf("KELVARD_MAX_INGEST_BYTES %q: want a positive number of bytes", v)}
		}
		l.bytes = n
	}
	if v := getenv("KELVARD_MAX_INGEST_ROWS"); v != "" {
		n, err := strconv.Atoi(v)
		if err != nil || n <= 0 {
			return nil, usageError{fmt.Errorf("KELVARD_MAX_INGEST_ROWS %q: want a positive number of readings", v)}
		}
		l.rows = n
	}
	fs.Int64Var(&l.bytes, "max-ingest-bytes", l.bytes, "largest readings body accepted, in bytes; larger is answered 413 (KELVARD_MAX_INGEST_BYTES)")
	fs.IntVar(&l.rows, "max-ingest-rows", l.rows, "most readings accepted in one request; more is answered 413 (KELVARD_MAX_INGEST_ROWS)")
	return l, nil
}

const benchUsage = "usage: kelvard bench ingest --database-url postgres://… [-n 1000000] [--positions 500] [--batch 10000] [--senders 3] [--rounds 1]\n" +
	"       kelvard bench assess --database-url postgres://… [--drives 1000] [--readings 5000] [--scrape-drives 10000]\n" +
	"       kelvard bench load --database-url postgres://… [--rate 500] [--duration 60s] [--warmup 5s] [--workers 10] [--max-workers 256]"

// cmdBench runs a benchmark; see package kelvard/jobs/bench.
func cmdBench(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	if len(args) > 0 && args[0] == "assess" {
		fs, c := newFlags("bench assess", getenv, stderr)
		var cfg bench.AssessConfig
		fs.IntVar(&cfg.Drives, "drives", 1000, "drives in the assessed fleet")
		fs.IntVar(&cfg.ReadingsPerDrive, "readings", 5000, "hourly readings per drive")
		fs.IntVar(&cfg.ScrapeDrives, "scrape-drives", 10000, "drives registered for the /metrics scrape")
		if err := parse(fs, args[1:]); err != nil {
			return err
		}
		cfg.DatabaseURL, cfg.Progress = c.databaseURL, stderr
		if cfg.Drives < 1 || cfg.ReadingsPerDrive < 2 || cfg.ScrapeDrives < cfg.Drives {
			return usageError{errors.New("bench assess: --drives must be at least 1, --readings at least 2, and --scrape-drives at least --drives")}
		}
		rep, err := bench.Assess(ctx, cfg)
		if err != nil {
			return err
		}
		rep.Print(stdout)
		return nil
	}
	if len(args) > 0 && args[0] == "load" {
		return cmdBenchLoad(ctx, args[1:], getenv, stdout, stderr)
	}
	if len(args) == 0 || args[0] != "ingest" {
		return usageError{errors.New(benchUsage)}
	}
	fs, c := newFlags("bench ingest", getenv, stderr)
	var cfg bench.IngestConfig
	fs.IntVar(&cfg.Readings, "n", 1000000, "readings to send in each phase")
	fs.IntVar(&cfg.Positions, "positions", 500, "positions (each with a drive) the readings are spread over")
	fs.IntVar(&cfg.BatchRows, "batch", 10000, "readings per request or COPY")
	fs.IntVar(&cfg.Senders, "senders", 3, "concurrent senders")
	fs.IntVar(&cfg.Rounds, "rounds", 1, "split the run into rounds in which CSV, JSON and COPY take turns, forward then backward (1: one phase after the other)")
	if err := parse(fs, args[1:]); err != nil {
		return err
	}
	if cfg.Readings <= 0 || cfg.Positions <= 0 || cfg.BatchRows <= 0 || cfg.Senders <= 0 || cfg.Rounds <= 0 {
		return usageError{errors.New("-n, --positions, --batch, --senders and --rounds must be positive")}
	}
	cfg.DatabaseURL, cfg.Progress = c.databaseURL, stderr
	rep, err := bench.Ingest(ctx, cfg)
	if err != nil {
		return err
	}
	rep.Print(stdout)
	return nil
}

// cmdBenchLoad runs `kelvard bench load`: the demo fleet in a scratch
// schema, a child server on the loopback interface and a fixed-rate
// request mix against it.
func cmdBenchLoad(ctx context.Context, args []string, getenv func(string) string, stdout, stderr io.Writer) error {
	fs, c := newFlags("bench load", getenv, stderr)
	var cfg bench.LoadConfig
	fs.IntVar(&cfg.Rate, "rate", 500, fmt.Sprintf("requests per second, held fixed (at most %d)", bench.MaxLoadRate))
	fs.DurationVar(&cfg.Duration, "duration", time.Minute, fmt.Sprintf("how long the counted attack lasts (at most %s)", bench.MaxLoadDuration))
	fs.DurationVar(&cfg.Warmup, "warmup", 5*time.Second, "an attack at the same rate before the counted one, not counted (0: none)")
	fs.IntVar(&cfg.Workers, "workers", 10, "request goroutines the attack starts with")
	fs.IntVar(&cfg.MaxWorkers, "max-workers", 256, fmt.Sprintf("most request goroutines while all are busy (at most %d)", bench.MaxLoadWorkers))
	fs.DurationVar(&cfg.Timeout, "timeout", 10*time.Second, "longest a request may take")
	var seed uint
	fs.UintVar(&seed, "seed", 1, "seed of the drives, filters and weeks the requests pick")
	fs.IntVar(&cfg.Positions, "positions", 0, "a registered fleet of this many positions with four weeks of readings instead of the demo fleet (0: the demo fleet)")
	if err := parse(fs, args); err != nil {
		return err
	}
	if cfg.Warmup < 0 || seed == 0 {
		return usageError{errors.New("bench load: --warmup must be 0 or more and --seed positive")}
	}
	if cfg.Warmup == 0 {
		cfg.Warmup = -1 // none, rather than the default
	}
	cfg.Seed = uint64(seed)
	cfg.DatabaseURL, cfg.Progress = c.databaseURL, stderr
	if err := cfg.Check(); err != nil {
		return usageError{fmt.Errorf("bench load: %w", err)}
	}
	rep, err := bench.Load(ctx, cfg)
	if err != nil {
		return err
	}
	rep.Print(stdout)
	return nil
}
