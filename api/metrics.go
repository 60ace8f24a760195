package api

import (
	"context"
	"fmt"
	"log/slog"
	"strconv"
	"time"

	"github.com/gin-gonic/gin"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"kelvard/health"
	"kelvard/store"
)

// JobStat is one job's last run, for the job metrics.
type JobStat struct {
	Job             string
	LastDurationS   float64
	LastSuccessUnix float64
	HasSuccess      bool
}

// fleetCollector builds the fleet metrics from the store at scrape time,
// so every replica exports the same values and no series goes stale.
type fleetCollector struct {
	store         *store.Store
	log           *slog.Logger
	perDriveLimit int
	jobs          func(ctx context.Context) ([]JobStat, error)
	now           func() time.Time

	drives, findings, eol, driveCap, driveFan, driveUtil, jobDuration, jobSuccess, scrapeErr *prometheus.Desc
}

func newFleetCollector(st *store.Store, log *slog.Logger, perDriveLimit int, jobs func(context.Context) ([]JobStat, error)) *fleetCollector {
	return &fleetCollector{
		store: st, log: log, perDriveLimit: perDriveLimit, jobs: jobs, now: time.Now,
		drives: prometheus.NewDesc("kelvard_drives", "Assessed drives by site and health band.", []string{"site", "health_band"}, nil),
		findings: prometheus.NewDesc("kelvard_findings_open", "Open and acknowledged findings (not suppressed or resolved) by site, kind and severity.",
			[]string{"site", "kind", "severity"}, nil),
		eol: prometheus.NewDesc("kelvard_capacitor_end_of_life_drives", "Drives whose DC-bus capacitors reach projected end of life within the window (cumulative).",
			[]string{"site", "within"}, nil),
		driveCap: prometheus.NewDesc("kelvard_drive_capacitor_life_used_ratio", "DC-bus capacitor life used (1 = end of life).",
			[]string{"drive", "position", "site"}, nil),
		driveFan: prometheus.NewDesc("kelvard_drive_fan_life_used_ratio", "Cooling fan life used (1 = L10 life reached).",
			[]string{"drive", "position", "site"}, nil),
		driveUtil: prometheus.NewDesc("kelvard_drive_current_utilisation_ratio", "Running current percentile over the derated allowed current.",
			[]string{"drive", "position", "site"}, nil),
		jobDuration: prometheus.NewDesc("kelvard_job_duration_seconds", "Duration of the job's last finished run.", []string{"job"}, nil),
		jobSuccess:  prometheus.NewDesc("kelvard_job_last_success_timestamp_seconds", "When the job last succeeded (Unix time).", []string{"job"}, nil),
		scrapeErr:   prometheus.NewDesc("kelvard_metrics_store_errors", "1 when the store could not be read for this scrape.", nil, nil),
	}
}

// Describe implements prometheus.Collector.
func (c *fleetCollector) Describe(ch chan<- *prometheus.Desc) {
	for _, d := range []*prometheus.Desc{c.drives, c.findings, c.eol, c.driveCap, c.driveFan, c.driveUtil, c.jobDuration, c.jobSuccess, c.scrapeErr} {
		ch <- d
	}
}

// Collect implements prometheus.Collector.
func (c *fleetCollector) Collect(ch chan<- prometheus.Metric) {
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	failed := 0.0
	snap, err := c.store.Snapshot(ctx, c.now(), c.perDriveLimit)
	if err != nil {
		c.log.Warn("metrics: read fleet", slog.Any("err", err))
		failed = 1
	} else {
		c.collectFleet(ch, snap)
	}
	if c.jobs != nil {
		stats, err := c.jobs(ctx)
		if err != nil {
			c.log.Warn("metrics: read jobs", slog.Any("err", err))
			failed = 1
		}
		for _, s := range stats {
			ch <- prometheus.MustNewConstMetric(c.jobDuration, prometheus.GaugeValue, s.LastDurationS, s.Job)
			if s.HasSuccess {
				ch <- prometheus.MustNewConstMetric(c.jobSuccess, prometheus.GaugeValue, s.LastSuccessUnix, s.Job)
			}
		}
	}
	ch <- prometheus.MustNewConstMetric(c.scrapeErr, prometheus.GaugeValue, failed)
}

func (c *fleetCollector) collectFleet(ch chan<- prometheus.Metric, snap store.FleetSnapshot) {
	for id, name := range snap.Sites {
		for _, b := range health.Bands() {
			ch <- prometheus.MustNewConstMetric(c.drives, prometheus.GaugeValue, float64(snap.Bands[id][b]), name, string(b))
		}
		for _, w := range store.EndOfLifeWindows() {
			within := strconv.Itoa(int(w.Hours()/24)) + "d"
			ch <- prometheus.MustNewConstMetric(c.eol, prometheus.GaugeValue, float64(snap.EndOfLife[id][w]), name, within)
		}
	}
	counts := map[string]float64{}
	for _, f := range snap.Findings {
		counts[fmt.Sprint(f.SiteID, "\x00", f.Kind, "\x00", f.Severity)] += float64(f.Count)
	}
	// Every site, kind and severity is exported, zeros included, so a
	// finding that resolves drops its series to 0 instead of vanishing.
	for id, name := range snap.Sites {
		for _, k := range health.Kinds() {
			for _, sev := range health.Severities() {
				n := counts[fmt.Sprint(id, "\x00", k, "\x00", sev)]
				ch <- prometheus.MustNewConstMetric(c.findings, prometheus.GaugeValue, n, name, string(k), string(sev))
			}
		}
	}
	for _, d := range snap.Drives {
		ch <- prometheus.MustNewConstMetric(c.driveCap, prometheus.GaugeValue, d.CapacitorLifeUsed, d.Serial, d.Position, d.Site)
		ch <- prometheus.MustNewConstMetric(c.driveFan, prometheus.GaugeValue, d.FanLifeUsed, d.Serial, d.Position, d.Site)
		if d.Utilisation != nil {
			ch <- prometheus.MustNewConstMetric(c.driveUtil, prometheus.GaugeValue, *d.Utilisation, d.Serial, d.Position, d.Site)
		}
	}
}

// metricsHandler serves the registry in the Prometheus text format.
func (s *Server) metricsHandler() gin.HandlerFunc {
	h := promhttp.HandlerFor(s.registry, promhttp.HandlerOpts{ErrorLog: slog.NewLogLogger(s.log.Handler(), slog.LevelWarn), EnableOpenMetrics: false})
	return func(c *gin.Context) { h.ServeHTTP(c.Writer, c.Request) }
}

// newRegistry builds the registry /metrics serves: the fleet collector,
// kelvard's own counters, and the Go and process collectors.
func (s *Server) newRegistry() (*prometheus.Registry, error) {
	reg := s.cfg.Registry
	if reg == nil {
		reg = prometheus.NewRegistry()
	}
	limit := s.cfg.PerDriveMetricsLimit
	if limit == 0 {
		limit = 10000
	}
	for _, c := range []prometheus.Collector{
		newFleetCollector(s.store, s.log, limit, s.cfg.JobStats),
		collectors.NewGoCollector(),
		collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}),
	} {
		if err := reg.Register(c); err != nil {
			return nil, fmt.Errorf("register metrics: %w", err)
		}
	}
	return reg, nil
}
