package bench_test

import (
	"bytes"
	"context"
	"strings"
	"testing"

	"kelvard/jobs/bench"
	"kelvard/store/storetest"
)

// TestAssessBenchmark runs a tiny assessment benchmark end to end (fleet
// registration, the bulk registration for the scrape, the baseline query,
// the kelvard server for the scrape), so a schema change that breaks any
// of its steps fails here and not at the next measurement.
func TestAssessBenchmark(t *testing.T) {
	bin := kelvardBinary(t)
	var progress bytes.Buffer
	rep, err := bench.Assess(context.Background(), bench.AssessConfig{
		DatabaseURL: storetest.PostgresURL(), Drives: 3, ReadingsPerDrive: 48, ScrapeDrives: 10,
		Executable: bin, Progress: &progress,
	})
	if err != nil {
		t.Fatalf("bench: %v\n%s", err, progress.String())
	}
	if rep.Drives != 3 || rep.Readings != 3*48 || rep.NewReadings != 3 || rep.ScrapeDrives != 10 {
		t.Errorf("fleet: %d drives, %d readings, %d new, %d scraped; want 3, 144, 3, 10",
			rep.Drives, rep.Readings, rep.NewReadings, rep.ScrapeDrives)
	}
	if rep.Full <= 0 || rep.Baseline <= 0 || rep.Floor <= 0 || rep.Incremental <= 0 || rep.Daily <= 0 || rep.Partial <= 0 || rep.Scrape <= 0 {
		t.Errorf("times: full %v, baseline %v, floor %v, incremental %v, daily %v, partial %v, scrape %v",
			rep.Full, rep.Baseline, rep.Floor, rep.Incremental, rep.Daily, rep.Partial, rep.Scrape)
	}
	// Ten drives, each with per-drive series and labels: far more than
	// the fleet aggregates alone.
	if rep.ScrapeSeriesSize < 2000 {
		t.Errorf("scrape of %d bytes", rep.ScrapeSeriesSize)
	}
	var out bytes.Buffer
	rep.Print(&out)
	for _, want := range []string{"full assessment", "ratio full/baseline", "ratio full/floor", "ratio incremental/full", "daily window checks", "ratio to the every-drive run", "/metrics scrape", "with 10 drives registered"} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("report lacks %q:\n%s", want, out.String())
		}
	}
}
