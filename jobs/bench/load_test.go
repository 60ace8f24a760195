package bench_test

import (
	"bytes"
	"context"
	"strings"
	"testing"
	"time"

	"kelvard/jobs/bench"
	"kelvard/store/storetest"
)

// TestLoadBenchmark builds kelvard, runs a short load benchmark against
// it on the demo fleet and on a small registered fleet, and checks the
// reports: every endpoint was asked, nothing failed, every post stored its
// rows, and the figures hang together.
func TestLoadBenchmark(t *testing.T) {
	bin := kelvardBinary(t)
	for _, c := range []struct {
		name      string
		positions int
		fleet     func(r bench.LoadReport) bool
	}{
		// The command's default: the demo fleet, with findings to list.
		{"demo fleet", 0, func(r bench.LoadReport) bool {
			return r.Sites == 5 && r.Positions == 80 && r.Drives > 80 && r.Readings > 600000 && r.Open > 0
		}},
		{"registered fleet", 12, func(r bench.LoadReport) bool {
			return r.Sites == 1 && r.Positions == 12 && r.Drives == 12 && r.Readings == 12*28*24
		}},
	} {
		t.Run(c.name, func(t *testing.T) {
			var progress bytes.Buffer
			rep, err := bench.Load(context.Background(), bench.LoadConfig{
				DatabaseURL: storetest.PostgresURL(), Rate: 50, Duration: 2 * time.Second, Warmup: time.Second,
				Positions: c.positions, Executable: bin, Progress: &progress,
			})
			if err != nil {
				t.Fatalf("bench: %v\n%s", err, progress.String())
			}
			if !c.fleet(rep) {
				t.Errorf("fleet %s: %d sites, %d positions, %d drives, %d readings, %d open findings",
					rep.Fleet, rep.Sites, rep.Positions, rep.Drives, rep.Readings, rep.Open)
			}
			checkLoadReport(t, rep)
		})
	}
}

// checkLoadReport checks a report of 2 s at 50 requests/s.
func checkLoadReport(t *testing.T, rep bench.LoadReport) {
	t.Helper()
	var out bytes.Buffer
	rep.Print(&out)
	t.Logf("\n%s", out.String())
	if len(rep.Endpoints) != 5 {
		t.Fatalf("%d endpoints in the report, want 5", len(rep.Endpoints))
	}
	sum, reads, share := 0, 0, 0
	for _, e := range rep.Endpoints {
		if e.Requests == 0 {
			t.Errorf("%s got no requests", e.Name)
		}
		if e.Errors != 0 || e.StatusCodes["200"] != e.Requests {
			t.Errorf("%s: %d errors, status codes %v of %d requests; %v", e.Name, e.Errors, e.StatusCodes, e.Requests, e.ErrorSamples)
		}
		if e.Requests > 0 && (e.P50 <= 0 || e.P50 > e.P99 || e.P99 > e.Max || e.Max > 10*time.Second) {
			t.Errorf("%s latencies: p50 %v, p99 %v, max %v", e.Name, e.P50, e.P99, e.Max)
		}
		sum += e.Requests
		share += e.Share
		if !strings.HasPrefix(e.Name, "POST") {
			reads += e.Requests
		}
	}
	if share != 100 || rep.Overall.Share != 100 {
		t.Errorf("the mix's shares add up to %d", share)
	}
	// 50 requests/s for 2 s: about a hundred, and each endpoint near its
	// share of them.
	if rep.Overall.Requests != sum || rep.Reads.Requests != reads || sum < 80 || sum > 120 {
		t.Errorf("requests: overall %d, reads %d; endpoints add up to %d, reads to %d", rep.Overall.Requests, rep.Reads.Requests, sum, reads)
	}
	if rep.Overall.Errors != 0 || !strings.Contains(out.String(), "0 errors, target none: met") {
		t.Errorf("errors: %d %v", rep.Overall.Errors, rep.Overall.ErrorSamples)
	}
	if rep.AchievedRate < 25 || rep.AchievedRate > 75 {
		t.Errorf("achieved rate %.1f requests/s, asked 50", rep.AchievedRate)
	}
	if len(rep.ReadP99BySlice) != 6 || rep.Slice.Round(time.Millisecond) != 333*time.Millisecond || rep.ReadsOverTarget < 0 || rep.ReadsOverTarget > rep.Reads.Requests {
		t.Errorf("slices of %v: %v; %d reads over the target", rep.Slice, rep.ReadP99BySlice, rep.ReadsOverTarget)
	}
	for _, p := range rep.ReadP99BySlice {
		if p <= 0 || p > rep.Reads.Max {
			t.Errorf("a slice's read p99 %v, the reads' max %v", p, rep.Reads.Max)
		}
	}
	posts := rep.Endpoints[len(rep.Endpoints)-1]
	if rep.Inserted != 100*posts.Requests {
		t.Errorf("%d readings inserted by %d posts of 100 rows", rep.Inserted, posts.Requests)
	}
	if rep.CPU.Client < 0 || rep.CPU.Server < 0 || rep.CPU.Database < 0 || rep.CPU.Total() <= 0 {
		t.Errorf("CPU %+v", rep.CPU)
	}
	if rep.PeakRSS <= 0 || rep.Machine.CPUs <= 0 || !strings.HasPrefix(rep.Machine.PostgreSQL, "PostgreSQL ") {
		t.Errorf("peak RSS %d, machine %+v", rep.PeakRSS, rep.Machine)
	}
	for _, want := range append([]string{"p50 ms", "p99 ms", "status codes", "overall", "reads (every GET)", "verdict:",
		"achieved rate", rep.Machine.GoVersion, rep.Machine.PostgreSQL}, names(rep)...) {
		if !strings.Contains(out.String(), want) {
			t.Errorf("report lacks %q", want)
		}
	}
}

func names(r bench.LoadReport) []string {
	var out []string
	for _, e := range r.Endpoints {
		out = append(out, e.Name)
	}
	return out
}
