package health

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestFanLifeHalving(t *testing.T) {
	// Source: common practice — fan L10 life (for example 40 000 h at
	// 60 °C) halves for every 10 to 15 °C hotter.
	cases := []struct {
		name          string
		halving, temp float64
		want          float64
	}{
		{"at reference", 10, 60, 40000},
		{"10 °C hotter halves", 10, 70, 20000},
		{"20 °C cooler quadruples", 10, 40, 160000},
		{"15 °C interval, 15 °C hotter halves", 15, 75, 20000},
		{"15 °C interval, 30 °C cooler quadruples", 15, 30, 160000},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := DefaultFanSpec()
			s.HalvingC = c.halving
			if got := s.LifeH(c.temp); got != c.want {
				t.Fatalf("LifeH(%v) = %v, want exactly %v", c.temp, got, c.want)
			}
		})
	}
	// Property: hotter never lives longer.
	rng := rand.New(rand.NewPCG(2, 3))
	s := DefaultFanSpec()
	for i := 0; i < 10000; i++ {
		s.HalvingC = 10 + 5*rng.Float64()
		a := -20 + 120*rng.Float64()
		b := a + 20*rng.Float64()
		if s.LifeH(b) > s.LifeH(a) {
			t.Fatalf("halving %v: life at %v °C exceeds life at %v °C", s.HalvingC, b, a)
		}
	}
}

func TestFanRunning(t *testing.T) {
	warm := DefaultFanSpec()
	warm.Runs, warm.SwitchOnC = FanWhenWarm, 45
	cases := []struct {
		name                    string
		heatsink, internal, fhz float64
		always, whenWarm        bool
	}{
		{"hot heatsink", 60, 30, 50, true, true},
		{"cool heatsink, running", 40, 50, 50, true, false},
		{"no heatsink, warm air", math.NaN(), 50, 0, true, true},
		{"no heatsink, cool air", math.NaN(), 30, 50, true, false},
		{"nothing logged, running", math.NaN(), math.NaN(), 50, true, true},
		{"nothing logged, stopped", math.NaN(), math.NaN(), 0, true, false},
	}
	for _, c := range cases {
		s := nanSample(0)
		s.HeatsinkC, s.InternalAirC, s.FrequencyHz = c.heatsink, c.internal, c.fhz
		if got := DefaultFanSpec().Running(s); got != c.always {
			t.Errorf("%s: always-on fan running %v", c.name, got)
		}
		if got := warm.Running(s); got != c.whenWarm {
			t.Errorf("%s: temperature-switched fan running %v, want %v", c.name, got, c.whenWarm)
		}
	}
}

func TestAccumulateFan(t *testing.T) {
	// Hand arithmetic on the halving rule (common practice): 40 000 h at
	// 60 °C; 1000 h at 60 °C use 1/40 of the life, 1000 h at 70 °C 1/20.
	p := DefaultFanParams()
	spec := DefaultFanSpec()
	t.Run("always on at reference temperature", func(t *testing.T) {
		st, rep, err := AccumulateFan(spec, p, FanState{}, constantSeries(testT0, 1001, 3600, 60, 10), LifeAirInputs{})
		if err != nil || relDiff(st.Damage, 0.025) > 1e-12 || rep.Hours != 1000 || st.AgingS != 1000*3600 {
			t.Fatalf("damage %v, report %+v, err %v", st.Damage, rep, err)
		}
	})
	t.Run("temperature-switched fan runs half the time", func(t *testing.T) {
		ss := constantSeries(testT0, 1001, 3600, 70, 10)
		for i := range ss {
			ss[i].HeatsinkC = 40
			if i%2 == 0 {
				ss[i].HeatsinkC = 60
			}
		}
		s := spec
		s.Runs, s.SwitchOnC = FanWhenWarm, 50
		st, _, _ := AccumulateFan(s, p, FanState{}, ss, LifeAirInputs{})
		if relDiff(st.Damage, 500/20000.0) > 1e-12 || st.AgingS != 500*3600 {
			t.Fatalf("damage %v (want 0.025), running %v s", st.Damage, st.AgingS)
		}
		r, _ := FanLife(s, p, st, st.LastAt)
		if math.Abs(r.AgingFraction-0.5) > 1e-12 || r.MeanTempC != 70 || relDiff(r.DamageRatePerH, 1/40000.0) > 1e-9 {
			t.Fatalf("running fraction %v, mean %v, rate %v", r.AgingFraction, r.MeanTempC, r.DamageRatePerH)
		}
	})
	t.Run("gap filled with the fan running at the fill temperature", func(t *testing.T) {
		q := p
		q.Interval.FillAirC = 70
		ss := constantSeries(testT0, 2, 3600, 60, 10)
		ss[1].At = ss[0].At + 10*3600
		st, rep, _ := AccumulateFan(spec, q, FanState{}, ss, LifeAirInputs{})
		if rep.Gaps != 1 || relDiff(st.Damage, 10/20000.0) > 1e-12 {
			t.Fatalf("damage %v, report %+v", st.Damage, rep)
		}
	})
}

func TestFanFindings(t *testing.T) {
	// Horizon 365 days, major within 90 (common practice).
	p := DefaultFanParams()
	spec := DefaultFanSpec()
	at := testT0
	t.Run("life used up", func(t *testing.T) {
		ss := constantSeries(testT0, 21000, 3600, 70, 10) // 20 999 h at 70 °C: L10 20 000 h
		st, _, _ := AccumulateFan(spec, p, FanState{}, ss, LifeAirInputs{})
		r, _ := FanLife(spec, p, st, st.LastAt)
		fs := FanFindings(p, r, st.LastAt)
		if len(fs) != 1 || fs[0].Rule != "fan.end_of_life" || fs[0].Severity != SeverityMajor {
			t.Fatalf("findings %+v", fs)
		}
		checkFinding(t, fs[0], fanRules)
		if want := testT0 + 20000*3600; abs64(r.EndReachedAt-want) > 1 {
			t.Fatalf("reached at %d, want %d", r.EndReachedAt, want)
		}
	})
	cases := []struct {
		days float64
		want Severity
	}{{30, SeverityMajor}, {200, SeverityMinor}, {500, ""}}
	for _, c := range cases {
		life := FanLifeReport{LifeReport: LifeReport{Projected: true, EndOfLifeAt: at + int64(c.days*86400), MeanTempC: 50, RemainingH: c.days * 24}}
		life.EndOfLifeEarliestAt = life.EndOfLifeAt
		fs := FanFindings(p, life, at)
		if c.want == "" {
			if len(fs) != 0 {
				t.Errorf("%v days: findings %+v", c.days, fs)
			}
			continue
		}
		if len(fs) != 1 || fs[0].Rule != "fan.end_of_life_near" || fs[0].Severity != c.want {
			t.Errorf("%v days: findings %+v", c.days, fs)
			continue
		}
		checkFinding(t, fs[0], fanRules)
	}
}

func TestFanSpecValidate(t *testing.T) {
	if err := DefaultFanSpec().Validate(); err != nil {
		t.Fatal(err)
	}
	for name, mut := range map[string]func(*FanSpec){
		"zero life":         func(s *FanSpec) { s.L10H = 0 },
		"halving too small": func(s *FanSpec) { s.HalvingC = 1 },
		"unknown mode":      func(s *FanSpec) { s.Runs = "sometimes" },
	} {
		s := DefaultFanSpec()
		mut(&s)
		if s.Validate() == nil {
			t.Errorf("%s accepted", name)
		}
	}
	p := DefaultFanParams()
	p.MajorWithinDays = 400
	if p.Validate() == nil {
		t.Error("major-within beyond the horizon accepted")
	}
}
