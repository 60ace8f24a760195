package api

import (
	"errors"
	"fmt"

	"github.com/prometheus/client_golang/prometheus"

	"kelvard/store"
)

// IngestMetrics counts the readings the ingest endpoints took in and turned
// away. The counters exist whether or not Config.Metrics is set, so the
// handlers never test for nil; with a registry they are registered on it.
type IngestMetrics struct {
	// Ingested counts readings stored (kelvard_readings_ingested_total);
	// a replayed reading already stored is not counted again.
	Ingested prometheus.Counter
	// Rejected counts readings not stored, by reason
	// (kelvard_readings_rejected_total): "invalid" for a row that failed a
	// check (every bad row of a refused batch included) and "conflict" for
	// a reading whose drive and time are stored with other values.
	Rejected *prometheus.CounterVec
}

// Rejection reasons, the values of the reason label.
const (
	rejectedInvalid  = "invalid"
	rejectedConflict = "conflict"
)

func newIngestMetrics(reg prometheus.Registerer) (*IngestMetrics, error) {
	m := &IngestMetrics{
		Ingested: prometheus.NewCounter(prometheus.CounterOpts{
			Name: "kelvard_readings_ingested_total",
			Help: "Readings stored by the ingest endpoints of this process.",
		}),
		Rejected: prometheus.NewCounterVec(prometheus.CounterOpts{
			Name: "kelvard_readings_rejected_total",
			Help: "Readings the ingest endpoints of this process did not store: invalid rows and conflicts with stored readings.",
		}, []string{"reason"}),
	}
	// Both series exist from the start, so a rate over them is defined.
	m.Rejected.WithLabelValues(rejectedInvalid)
	m.Rejected.WithLabelValues(rejectedConflict)
	if reg == nil {
		return m, nil
	}
	if err := reg.Register(m.Ingested); err != nil {
		var are prometheus.AlreadyRegisteredError
		if !errors.As(err, &are) {
			return nil, fmt.Errorf("register kelvard_readings_ingested_total: %w", err)
		}
		// Another server on the same registry: count into its counter.
		c, ok := are.ExistingCollector.(prometheus.Counter)
		if !ok {
			return nil, fmt.Errorf("register kelvard_readings_ingested_total: taken by a %T", are.ExistingCollector)
		}
		m.Ingested = c
	}
	if err := reg.Register(m.Rejected); err != nil {
		var are prometheus.AlreadyRegisteredError
		if !errors.As(err, &are) {
			return nil, fmt.Errorf("register kelvard_readings_rejected_total: %w", err)
		}
		c, ok := are.ExistingCollector.(*prometheus.CounterVec)
		if !ok {
			return nil, fmt.Errorf("register kelvard_readings_rejected_total: taken by a %T", are.ExistingCollector)
		}
		m.Rejected = c
	}
	return m, nil
}

// IngestMetrics returns the server's ingest counters.
func (s *Server) IngestMetrics() *IngestMetrics { return s.ingest }

// countRows counts the distinct rows a list of field errors names.
func countRows(fe []store.FieldError) int {
	seen := make(map[int]struct{}, len(fe))
	for _, e := range fe {
		seen[e.Row] = struct{}{}
	}
	return len(seen)
}
