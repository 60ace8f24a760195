package health

import (
	"math"
	"math/rand/v2"
	"testing"
)

// heatsinkSeries builds 12 weeks of hourly running readings ending at end.
// load(h) gives the load fraction at hour h; rise(h, load) the heatsink rise
// over ambient before noise.
func heatsinkSeries(seed uint64, end int64, load func(h int) float64, rise func(h int, load float64) float64) []Sample {
	rng := rand.New(rand.NewPCG(seed, 99))
	const hours = 12 * 7 * 24
	out := make([]Sample, 0, hours)
	for h := 0; h < hours; h++ {
		s := nanSample(end - int64(hours-1-h)*3600)
		l := load(h)
		s.AmbientC = 25 + 5*math.Sin(2*math.Pi*float64(h)/24) + rng.NormFloat64()
		s.CurrentA = 100 * l
		s.FrequencyHz = 50
		s.HeatsinkC = s.AmbientC + rise(h, l) + 0.8*rng.NormFloat64()
		out = append(out, s)
	}
	return out
}

func TestHeatsinkTrend(t *testing.T) {
	// Constructed series (common practice: a rise over ambient that grows at
	// the same load points to a clogged filter, dirty heatsink or failing
	// fan; a rise that follows load does not). Rated current 100 A.
	p := DefaultHeatsinkParams()
	end := testT0 + 200*86400
	week := func(h int) float64 { return float64(h) / (7 * 24) }
	rng := rand.New(rand.NewPCG(4, 4))
	dailyLoad := make([]float64, 12*7)
	for i := range dailyLoad {
		dailyLoad[i] = 0.3 + 0.6*rng.Float64()
	}
	cases := []struct {
		name      string
		load      func(h int) float64
		rise      func(h int, l float64) float64
		severity  Severity // "" for no finding
		slope     float64  // expected combined slope, K/week
		tolerance float64
	}{
		{"flat at constant load", func(int) float64 { return 0.6 },
			func(int, float64) float64 { return 20 }, "", 0, 0.1},
		{"rising 0.5 K/week at constant load", func(int) float64 { return 0.6 },
			func(h int, _ float64) float64 { return 20 + 0.5*week(h) }, SeverityMinor, 0.5, 0.05},
		{"rising 1 K/week at constant load", func(int) float64 { return 0.6 },
			func(h int, _ float64) float64 { return 20 + week(h) }, SeverityMajor, 1, 0.05},
		{"load ramps, rise follows load", func(h int) float64 { return 0.3 + 0.6*week(h)/12 },
			func(_ int, l float64) float64 { return 40 * l }, "", 0, 0.1},
		// Without moving each weekly mean to its bin's mean load, this
		// series reads as about 0.3 K/week of fouling.
		{"load drifts up with daily swings, rise follows load", func(h int) float64 { return 0.3 + 0.3*week(h)/12 + 0.3*dailyLoad[h/24] },
			func(_ int, l float64) float64 { return 5 + 40*l*l }, "", 0, 0.1},
		{"load changes day to day, rise follows load", func(h int) float64 { return dailyLoad[h/24] },
			func(_ int, l float64) float64 { return 5 + 40*l*l }, "", 0, 0.1},
		{"load changes day to day, rising 0.5 K/week", func(h int) float64 { return dailyLoad[h/24] },
			func(h int, l float64) float64 { return 5 + 40*l*l + 0.5*week(h) }, SeverityMinor, 0.5, 0.1},
	}
	for i, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			ss := heatsinkSeries(uint64(i), end, c.load, c.rise)
			r, err := HeatsinkTrend(ss, 100, end, p)
			if err != nil {
				t.Fatal(err)
			}
			// A steady ramp leaves no load bin with four weekly means: no
			// trend can be judged, which is also no finding.
			ramp := c.name == "load ramps, rise follows load"
			if r.Usable == ramp || math.Abs(r.SlopeKPerWeek-c.slope) > c.tolerance {
				t.Fatalf("usable %v, slope %v K/week, want %v ± %v (bins %+v)", r.Usable, r.SlopeKPerWeek, c.slope, c.tolerance, r.Bins)
			}
			fs := HeatsinkFindings(r, p)
			if c.severity == "" {
				if len(fs) != 0 {
					t.Fatalf("findings %+v", fs)
				}
				return
			}
			if len(fs) != 1 || fs[0].Rule != "fan.heatsink_rise" || fs[0].Severity != c.severity {
				t.Fatalf("findings %+v, want %s", fs, c.severity)
			}
			checkFinding(t, fs[0], heatsinkRules)
		})
	}
	t.Run("stopped and light-load readings are ignored", func(t *testing.T) {
		ss := heatsinkSeries(9, end, func(int) float64 { return 0.6 }, func(int, float64) float64 { return 20 })
		for i := range ss {
			if i%3 == 0 {
				ss[i].FrequencyHz, ss[i].CurrentA, ss[i].HeatsinkC = 0, 0, ss[i].AmbientC+float64(i)/100
			}
		}
		r, _ := HeatsinkTrend(ss, 100, end, p)
		if want := len(ss) - (len(ss)+2)/3; r.Samples != want || math.Abs(r.SlopeKPerWeek) > 0.1 {
			t.Fatalf("used %d samples (want %d), slope %v", r.Samples, want, r.SlopeKPerWeek)
		}
	})
	t.Run("too little data", func(t *testing.T) {
		ss := heatsinkSeries(1, end, func(int) float64 { return 0.6 }, func(h int, _ float64) float64 { return 20 + week(h) })
		r, _ := HeatsinkTrend(ss[len(ss)-24*14:], 100, end, p) // two weeks
		if r.Usable || len(HeatsinkFindings(r, p)) != 0 {
			t.Fatalf("report %+v", r)
		}
	})
	if _, err := HeatsinkTrend(nil, 0, end, p); err == nil {
		t.Error("zero rated current accepted")
	}
}
