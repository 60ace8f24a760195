package demo

import (
	"sync"
	"testing"
	"time"

	"kelvard/health"
)

// The checked-in demo files (testdata/demo at the repository root) are
// generated with this seed and reference time.
const demoSeed = 1

var demoNow = time.Date(2026, 11, 30, 0, 0, 0, 0, time.UTC)

// demoScenario and demoExpected build the checked-in scenario once per test
// binary; tests only read them.
var (
	demoScenario = sync.OnceValue(func() *Scenario { return Generate(demoSeed, demoNow) })
	demoExpected = sync.OnceValues(func() (Expected, error) { return demoScenario().ExpectedFindings() })
)

func expected(t *testing.T) Expected {
	t.Helper()
	ex, err := demoExpected()
	if err != nil {
		t.Fatalf("expected findings: %v", err)
	}
	return ex
}

// rules returns the rule ids of findings.
func rules(fs []health.Finding) []string {
	out := make([]string, len(fs))
	for i, f := range fs {
		out[i] = f.Rule
	}
	return out
}

// window returns the samples with At in (to - d, to].
func window(samples []health.Sample, to time.Time, d time.Duration) []health.Sample {
	var out []health.Sample
	for _, s := range samples {
		if s.At > to.Add(-d).Unix() && s.At <= to.Unix() {
			out = append(out, s)
		}
	}
	return out
}
