package bench_test

import (
	"bytes"
	"context"
	"strings"
	"testing"

	"kelvard/jobs/bench"
	"kelvard/store/storetest"
)

// TestIngestBenchmark builds kelvard, runs a small ingest benchmark with it
// as the server and checks the report.
func TestIngestBenchmark(t *testing.T) {
	bin := kelvardBinary(t)
	var progress bytes.Buffer
	rep, err := bench.Ingest(context.Background(), bench.IngestConfig{
		DatabaseURL: storetest.PostgresURL(), Readings: 3000, Positions: 20, BatchRows: 400, Senders: 2,
		Executable: bin, Progress: &progress,
	})
	if err != nil {
		t.Fatalf("bench: %v\n%s", err, progress.String())
	}
	for _, p := range []bench.Phase{rep.CSV, rep.JSON, rep.Copy} {
		if p.Rows != 3000 || p.Elapsed <= 0 || p.RowsPerSecond() <= 0 {
			t.Errorf("phase %s: %d rows in %v", p.Name, p.Rows, p.Elapsed)
		}
		// /proc counts CPU in hundredths of a second, too coarse to
		// insist on for a run this small; it must not go backwards.
		if p.CPU.Client < 0 || p.CPU.Server < 0 || p.CPU.Database < 0 || (p.PeakRSS == 0 && p.CPU.Server != 0) {
			t.Errorf("phase %s CPU %+v", p.Name, p.CPU)
		}
	}
	if rep.CSV.CPU.Total()+rep.JSON.CPU.Total()+rep.Copy.CPU.Total() <= 0 {
		t.Error("no CPU time measured at all")
	}
	if rep.CSV.PeakRSS <= 0 || rep.JSON.PeakRSS <= 0 || rep.Copy.PeakRSS != 0 {
		t.Errorf("peak RSS: CSV %d, JSON %d, COPY %d", rep.CSV.PeakRSS, rep.JSON.PeakRSS, rep.Copy.PeakRSS)
	}
	if rep.Machine.CPUs <= 0 || rep.Machine.GoVersion == "" {
		t.Errorf("machine %+v", rep.Machine)
	}
	var out bytes.Buffer
	rep.Print(&out)
	for _, want := range []string{"HTTP CSV", "HTTP JSON", "pgx COPY", "CSV/COPY", "JSON/COPY", "peak RSS", "CPU seconds per million", rep.Machine.GoVersion} {
		if !strings.Contains(out.String(), want) {
			t.Errorf("report lacks %q:\n%s", want, out.String())
		}
	}
}
