// Package api owns kelvard's HTTP interface: gin routes under /api/v1,
// bearer-token auth by role and site, validation, RFC 9457 problem answers,
// the OpenAPI document, health and readiness probes and the metrics
// endpoint. It holds no state of its own between requests, so any number of
// replicas can serve one database.
package api

import (
	"context"
	"log/slog"
	"net/http"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	"github.com/gin-gonic/gin"
	"github.com/prometheus/client_golang/prometheus"

	"kelvard/store"
)

// Config tunes the HTTP server.
type Config struct {
	// Version is reported by /healthz and the OpenAPI document.
	Version string
	// MaxBodyBytes caps register request bodies (default 1 MiB).
	MaxBodyBytes int64
	// MaxImportBytes caps a CSV import body (default 32 MiB).
	MaxImportBytes int64
	// TrustedProxies lists the proxies whose X-Forwarded-For is believed;
	// empty trusts none.
	TrustedProxies []string
	// Ready, when set, is asked by /readyz besides the database checks (the
	// demo loader, say, holds readiness until its first assessment).
	Ready func(ctx context.Context) error
	// Registry is the Prometheus registry /metrics serves; nil makes a new
	// one. Other packages register their counters on it.
	Registry *prometheus.Registry
	// PerDriveMetricsLimit is the largest fleet for which per-drive series
	// are exported (default 10 000; past that one series per drive stops
	// being a monitoring job and the API serves the values).
	PerDriveMetricsLimit int
	// MetricsToken requires a bearer token (any role) on /metrics.
	MetricsToken bool
	// RateLimit is the requests per second each token may make on one
	// replica (0 turns the limit off); RateBurst the bucket size (default
	// twice the rate).
	RateLimit float64
	RateBurst int
	// JobStats reports each job's last run for the job metrics.
	JobStats func(ctx context.Context) ([]JobStat, error)
	// Jobs lists job runs and starts manual ones (*jobs.Scheduler); nil
	// answers the job endpoints with 503.
	Jobs JobRunner
	// MaxIngestBytes caps a readings body (default 32 MiB) and
	// MaxIngestRows the readings in one request (default 50 000); more is
	// answered 413.
	MaxIngestBytes int64
	MaxIngestRows  int
	// Pages serves every path outside /api/ that no API route owns: the
	// server-rendered pages (package web), handed in by main so that api
	// does not depend on them. Nil answers such paths 404.
	Pages http.Handler
}

// Server is kelvard's HTTP handler.
type Server struct {
	cfg    Config
	store  *store.Store
	log    *slog.Logger
	engine *gin.Engine
	ops    []operation
	// registry is what /metrics serves.
	registry *prometheus.Registry
	// limiters enforce the per-token request rate.
	limiters *limiters
	ingest   *IngestMetrics
	// migrated caches a positive migrations check: once current, a running
	// binary's schema stays current.
	migrated atomic.Bool
	// openapi holds the serialised OpenAPI document, built on first use.
	openapi struct {
		sync.Once
		body []byte
		err  error
	}
}

// New builds the server and its routes.
func New(cfg Config, st *store.Store, log *slog.Logger) (*Server, error) {
	if cfg.MaxBodyBytes <= 0 {
		cfg.MaxBodyBytes = 1 << 20
	}
	if cfg.MaxImportBytes <= 0 {
		cfg.MaxImportBytes = DefaultMaxImportBytes
	}
	if log == nil {
		log = slog.New(slog.DiscardHandler)
	}
	gin.SetMode(gin.ReleaseMode)
	e := gin.New()
	e.HandleMethodNotAllowed = true
	e.ContextWithFallback = true
	if err := e.SetTrustedProxies(cfg.TrustedProxies); err != nil {
		return nil, err
	}
	s := &Server{cfg: cfg, store: st, log: log, engine: e, limiters: newLimiters(cfg.RateLimit, cfg.RateBurst)}
	reg, err := s.newRegistry()
	if err != nil {
		return nil, err
	}
	s.registry = reg
	if err := s.initReadings(); err != nil {
		return nil, err
	}
	e.Use(s.recoverPanics, s.accessLog, s.securityHeaders)
	e.NoRoute(func(c *gin.Context) {
		if s.cfg.Pages != nil && !strings.HasPrefix(c.Request.URL.Path, "/api/") {
			// gin presets 404 for an unmatched path; the pages answer
			// with their own status, 200 unless they say otherwise.
			c.Status(http.StatusOK)
			s.cfg.Pages.ServeHTTP(c.Writer, c.Request)
			return
		}
		writeProblem(c, Problem{Status: http.StatusNotFound, Detail: "no such endpoint; see /api/v1/openapi.json"})
	})
	e.NoMethod(func(c *gin.Context) {
		writeProblem(c, Problem{Status: http.StatusMethodNotAllowed, Detail: "this endpoint does not take " + c.Request.Method})
	})
	s.routes()
	return s, nil
}

// ServeHTTP makes Server an http.Handler.
func (s *Server) ServeHTTP(w http.ResponseWriter, r *http.Request) { s.engine.ServeHTTP(w, r) }

// Engine returns the gin engine, for tests that list its routes.
func (s *Server) Engine() *gin.Engine { return s.engine }

// HTTPServer wraps the handler in an http.Server with timeouts set, so a
// slow client cannot hold a connection forever.
func (s *Server) HTTPServer(addr string) *http.Server {
	return &http.Server{
		Addr:              addr,
		Handler:           s,
		ReadHeaderTimeout: 10 * time.Second,
		ReadTimeout:       2 * time.Minute,
		WriteTimeout:      5 * time.Minute,
		IdleTimeout:       2 * time.Minute,
		MaxHeaderBytes:    64 << 10,
	}
}

func (s *Server) recoverPanics(c *gin.Context) {
	defer func() {
		if v := recover(); v != nil {
			if v == http.ErrAbortHandler {
				panic(v)
			}
			s.log.ErrorContext(c.Request.Context(), "handler panic", slog.String("path", c.Request.URL.Path), slog.Any("panic", v))
			writeProblem(c, Problem{Status: http.StatusInternalServerError, Detail: "an internal error occurred; it has been logged"})
		}
	}()
	c.Next()
}

func (s *Server) accessLog(c *gin.Context) {
	start := time.Now()
	c.Next()
	level := slog.LevelDebug
	if c.Writer.Status() >= 500 {
		level = slog.LevelWarn
	}
	s.log.Log(c.Request.Context(), level, "request",
		slog.String("method", c.Request.Method), slog.String("path", c.FullPath()),
		slog.Int("status", c.Writer.Status()), slog.Duration("took", time.Since(start)),
		slog.String("actor", store.PrincipalFrom(c.Request.Context()).Actor))
}

// securityHeaders sets the headers every answer carries.
func (s *Server) securityHeaders(c *gin.Context) {
	h := c.Writer.Header()
	h.Set("X-Content-Type-Options", "nosniff")
	h.Set("Referrer-Policy", "no-referrer")
	h.Set("X-Frame-Options", "DENY")
	h.Set("Cache-Control", "no-store")
	c.Next()
}

// health answers whether the process is alive; it never touches the
// database.
func (s *Server) health(c *gin.Context) {
	c.JSON(http.StatusOK, gin.H{"status": "ok", "version": s.cfg.Version})
}

// ready answers 200 only when the database answers, every migration is
// applied and the optional readiness hook agrees.
func (s *Server) ready(c *gin.Context) {
	ctx, cancel := context.WithTimeout(c.Request.Context(), 3*time.Second)
	defer cancel()
	notReady := func(reason string) {
		c.Header("Retry-After", "5")
		writeProblem(c, Problem{Status: http.StatusServiceUnavailable, Title: "Not Ready", Detail: reason})
	}
	if err := s.store.Ping(ctx); err != nil {
		notReady("the database does not answer")
		return
	}
	if !s.migrated.Load() {
		ok, err := s.store.MigrationsCurrent(ctx)
		if err != nil || !ok {
			notReady("database migrations are not current")
			return
		}
		s.migrated.Store(true)
	}
	if s.cfg.Ready != nil {
		if err := s.cfg.Ready(ctx); err != nil {
			notReady(err.Error())
			return
		}
	}
	c.JSON(http.StatusOK, gin.H{"status": "ready"})
}
