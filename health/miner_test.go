package health

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/integrate"
	"gonum.org/v1/gonum/integrate/quad"
)

const testT0 = int64(1_704_067_200) // 2024-01-01T00:00:00Z

// series builds a realistic series of readings every step seconds: internal
// air on a daily cycle with a seasonal swing and noise, output current on a
// daily load cycle with noise, and stopped spells. Seeded, so deterministic.
func series(seed uint64, t0 int64, n int, step int64, iref float64) []Sample {
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	out := make([]Sample, n)
	stopped := false
	for i := range out {
		at := t0 + int64(i+1)*step
		day := float64(at%86400) / 86400
		year := float64(at-t0) / (365 * 86400)
		s := nanSample(at)
		s.AmbientC = 25 + 8*math.Sin(2*math.Pi*(year-0.25)) + 6*math.Sin(2*math.Pi*(day-0.3)) + rng.NormFloat64()*0.3
		s.InternalAirC = s.AmbientC + 8 + rng.NormFloat64()*0.4
		s.HeatsinkC = s.InternalAirC + 15
		if rng.Float64() < 0.002 {
			stopped = !stopped
		}
		if stopped {
			s.FrequencyHz, s.CurrentA = 0, 0
		} else {
			s.FrequencyHz = 50
			s.CurrentA = iref * (0.65 + 0.25*math.Sin(2*math.Pi*(day-0.4)) + 0.05*rng.NormFloat64())
		}
		out[i] = s
	}
	return out
}

// constantSeries is a series at one internal air temperature and current.
func constantSeries(t0 int64, n int, step int64, airC, currentA float64) []Sample {
	out := make([]Sample, n)
	for i := range out {
		s := nanSample(t0 + int64(i)*step)
		s.InternalAirC, s.CurrentA, s.FrequencyHz = airC, currentA, 50
		out[i] = s
	}
	return out
}

func relDiff(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / math.Max(math.Abs(a), math.Abs(b))
}

func TestMinerCheckValue128000(t *testing.T) {
	// Source: DESIGN.md section 3 (Palmgren–Miner rule with the 10-degree
	// rule of capacitor makers' application notes): a 5000 h / 105 °C part
	// without ripple term, half its time at 45 °C and half at 65 °C, lasts
	// 128 000 h (1 / (0.5/320 000 + 0.5/80 000)).
	s := noRippleSpec(5000, 105)
	got := MinerLifeH([]MinerExposure{{Hours: 0.5, LifeH: s.LifeH(45)}, {Hours: 0.5, LifeH: s.LifeH(65)}})
	if relDiff(got, 128000) > 1e-12 {
		t.Fatalf("Miner life %v h, want 128 000 h", got)
	}
	// The same through the accumulator: hourly readings alternating one
	// hour at 45 °C and one at 65 °C for 1000 h.
	var samples []Sample
	for i := 0; i <= 1000; i++ {
		c := 45.0
		if i%2 == 0 {
			c = 65
		}
		samples = append(samples, constantSeries(testT0+int64(i)*3600, 1, 3600, c, 0)...)
	}
	st, rep, err := AccumulateCapacitor(s, DefaultCapacitorParams(), CapacitorState{}, samples, LifeAirInputs{})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Hours != 1000 || relDiff(1000/st.Damage, 128000) > 1e-12 {
		t.Fatalf("accumulated %v h, damage %v: life %v h, want 128 000", rep.Hours, st.Damage, 1000/st.Damage)
	}
}

func TestMinerRatedPointAccumulation(t *testing.T) {
	// At rated temperature and rated ripple (DESIGN.md section 3) the part
	// uses one rated life per L0 hours: 1000 h of minute readings use 1/5.
	s := rippleSpec()
	st, _, err := AccumulateCapacitor(s, DefaultCapacitorParams(), CapacitorState{}, constantSeries(testT0, 60000+1, 60, 105, 37.3), LifeAirInputs{})
	if err != nil {
		t.Fatal(err)
	}
	// 60 000 float64 additions: rounding stays far below 1e-9.
	if relDiff(st.Damage, 0.2) > 1e-9 {
		t.Fatalf("damage %v, want 0.2", st.Damage)
	}
}

func TestMinerAgainstGonumQuadrature(t *testing.T) {
	// Reference: gonum integrate/quad (Gauss–Legendre) and
	// integrate.Simpsons of 1/L(T(t)) for a sinusoidal daily cycle of the
	// air temperature; the accumulator sums minute readings.
	for _, spec := range []CapacitorSpec{noRippleSpec(5000, 105), {RatedLifeH: 5000, RatedTempC: 105, ActivationEnergyEV: 0.7}} {
		temp := func(hours float64) float64 { return 50 + 12*math.Sin(2*math.Pi*hours/24) }
		rate := func(hours float64) float64 { return 1 / spec.LifeH(temp(hours)) }
		const days = 10
		want := quad.Fixed(rate, 0, 24*days, 400, quad.Legendre{}, 0)

		n := days * 24 * 60
		samples := make([]Sample, n+1)
		xs, fs := make([]float64, n+1), make([]float64, n+1)
		for i := range samples {
			h := float64(i) / 60
			samples[i] = constantSeries(testT0+int64(i)*60, 1, 60, temp(h), 0)[0]
			xs[i], fs[i] = h, rate(h)
		}
		st, _, err := AccumulateCapacitor(spec, DefaultCapacitorParams(), CapacitorState{}, samples, LifeAirInputs{})
		if err != nil {
			t.Fatal(err)
		}
		if d := relDiff(st.Damage, want); d > 1e-9 {
			t.Errorf("%s: accumulated damage %v, gonum quadrature %v (rel %v)", spec.Law(), st.Damage, want, d)
		}
		if d := relDiff(integrate.Simpsons(xs, fs), want); d > 1e-9 {
			t.Errorf("%s: gonum Simpsons and Legendre disagree by %v", spec.Law(), d)
		}
	}
}

func TestMinerOrderDoesNotMatter(t *testing.T) {
	// Property of the Palmgren–Miner sum: the damage of a set of (dt, T)
	// intervals does not depend on the order they are read in.
	rng := rand.New(rand.NewPCG(7, 11))
	spec := rippleSpec()
	for trial := 0; trial < 50; trial++ {
		n := 200 + rng.IntN(800)
		dts := make([]int64, n)
		temps := make([]float64, n)
		for i := range dts {
			dts[i] = 1 + rng.Int64N(7200)
			temps[i] = 20 + 70*rng.Float64()
		}
		build := func(order []int) ([]MinerExposure, []Sample) {
			ex := make([]MinerExposure, n)
			ss := make([]Sample, 0, n+1)
			at := testT0
			ss = append(ss, constantSeries(at, 1, 0, 0, 0)...)
			for k, i := range order {
				ex[k] = MinerExposure{Hours: float64(dts[i]) / 3600, LifeH: spec.LifeH(temps[i])}
				at += dts[i]
				ss = append(ss, constantSeries(at, 1, 0, temps[i], 0)...)
			}
			return ex, ss
		}
		order := rng.Perm(n)
		ex1, ss1 := build(identity(n))
		ex2, ss2 := build(order)
		if d := relDiff(MinerDamage(ex1), MinerDamage(ex2)); d > 1e-12 {
			t.Fatalf("trial %d: MinerDamage differs by %v after shuffling", trial, d)
		}
		p := DefaultCapacitorParams()
		p.Interval.MaxGapS = 7200
		a, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss1, LifeAirInputs{})
		b, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss2, LifeAirInputs{})
		if d := relDiff(a.Damage, b.Damage); d > 1e-12 {
			t.Fatalf("trial %d: accumulated damage differs by %v after shuffling", trial, d)
		}
		if d := relDiff(a.Damage, MinerDamage(ex1)); d > 1e-12 {
			t.Fatalf("trial %d: accumulator %v and MinerDamage %v differ", trial, a.Damage, MinerDamage(ex1))
		}
	}
}

func identity(n int) []int {
	out := make([]int, n)
	for i := range out {
		out[i] = i
	}
	return out
}

func TestAccumulateChunkedEqualsOneShot(t *testing.T) {
	// Property: feeding a series in one call or in many gives the same
	// state and reports (1e-9 relative; in fact bit for bit).
	rng := rand.New(rand.NewPCG(3, 5))
	spec := rippleSpec()
	p := DefaultCapacitorParams()
	fspec := DefaultFanSpec()
	fspec.Runs = FanWhenWarm
	fp := DefaultFanParams()
	for trial := 0; trial < 20; trial++ {
		ss := series(uint64(trial), testT0, 20000+rng.IntN(20000), 60*int64(1+rng.IntN(30)), 37.3)
		est := make([]float64, len(ss))
		for i := range ss {
			est[i] = math.NaN()
			switch rng.IntN(40) {
			case 0:
				ss[i].InternalAirC = math.NaN()
			case 1:
				ss[i].InternalAirC = math.NaN()
				est[i] = ss[i].AmbientC + 6
			case 2:
				ss[i].InternalAirC, ss[i].AmbientC = math.NaN(), math.NaN()
			case 3:
				ss[i].CurrentA = math.NaN()
			case 4: // a hole of up to a day
				for k := i; k < len(ss); k++ {
					ss[k].At += rng.Int64N(86400)
				}
			case 5: // a replayed reading
				if i > 0 {
					ss[i].At = ss[i-1].At
				}
			}
		}
		air := LifeAirInputs{InternalC: est, RiseOverAmbientC: 4}
		one, oneRep, err := AccumulateCapacitor(spec, p, CapacitorState{}, ss, air)
		if err != nil {
			t.Fatal(err)
		}
		fone, _, err := AccumulateFan(fspec, fp, FanState{}, ss, air)
		if err != nil {
			t.Fatal(err)
		}
		var many CapacitorState
		var fmany FanState
		var manyRep AccumulationReport
		for lo := 0; lo < len(ss); {
			hi := min(len(ss), lo+1+rng.IntN(3000))
			part := LifeAirInputs{InternalC: est[lo:hi], RiseOverAmbientC: 4}
			var r AccumulationReport
			many, r, err = AccumulateCapacitor(spec, p, many, ss[lo:hi], part)
			if err != nil {
				t.Fatal(err)
			}
			fmany, _, _ = AccumulateFan(fspec, fp, fmany, ss[lo:hi], part)
			manyRep.Samples += r.Samples
			manyRep.Skipped += r.Skipped
			manyRep.Gaps += r.Gaps
			manyRep.DamageAdded += r.DamageAdded
			lo = hi
		}
		if relDiff(one.Damage, many.Damage) > 1e-9 || relDiff(fone.Damage, fmany.Damage) > 1e-9 {
			t.Fatalf("trial %d: one-shot %v/%v, chunked %v/%v", trial, one.Damage, fone.Damage, many.Damage, fmany.Damage)
		}
		if oneRep.Samples != manyRep.Samples || oneRep.Skipped != manyRep.Skipped || oneRep.Gaps != manyRep.Gaps ||
			relDiff(oneRep.DamageAdded, manyRep.DamageAdded) > 1e-9 || one.Air != many.Air || one.LastAt != many.LastAt {
			t.Fatalf("trial %d: reports differ: %+v vs %+v", trial, oneRep, manyRep)
		}
		oneDays, manyDays := one.DayBuckets(), many.DayBuckets()
		if len(oneDays) != len(manyDays) {
			t.Fatalf("trial %d: %d day buckets one-shot, %d chunked", trial, len(oneDays), len(manyDays))
		}
		for i := range oneDays {
			a, b := oneDays[i], manyDays[i]
			if a.Day != b.Day || relDiff(a.Damage, b.Damage) > 1e-9 || relDiff(a.Seconds, b.Seconds) > 1e-9 || relDiff(a.TempS, b.TempS) > 1e-9 {
				t.Fatalf("trial %d: day bucket %d differs: %+v vs %+v", trial, i, a, b)
			}
		}
		at := one.LastAt + 86400
		r1, _ := CapacitorLife(spec, p, one, at)
		r2, _ := CapacitorLife(spec, p, many, at)
		if relDiff(r1.RemainingH, r2.RemainingH) > 1e-9 || relDiff(r1.RemainingAtPresentH, r2.RemainingAtPresentH) > 1e-9 || r1.EndOfLifeAt != r2.EndOfLifeAt {
			t.Fatalf("trial %d: life reports differ: %+v vs %+v", trial, r1, r2)
		}
	}
}

func TestAccumulateDoesNotChangeItsInput(t *testing.T) {
	spec := rippleSpec()
	p := DefaultCapacitorParams()
	ss := series(1, testT0, 3000, 60, 37.3)
	st, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss[:1500], LifeAirInputs{})
	before := st.DayBuckets()
	// Two different continuations from the same ledger must not disturb
	// it or each other.
	a, _, _ := AccumulateCapacitor(spec, p, st, ss[1500:], LifeAirInputs{})
	b, _, _ := AccumulateCapacitor(spec, p, st, ss[1500:2000], LifeAirInputs{})
	after := st.DayBuckets()
	if len(after) != len(before) {
		t.Fatalf("the ledger passed in was changed")
	}
	for i := range before {
		if before[i] != after[i] {
			t.Fatalf("the ledger passed in was changed at day %d", i)
		}
	}
	ab, bb := a.DayBuckets(), b.DayBuckets()
	for i := range len(st.Days) {
		if ab[i] != before[i] || bb[i] != before[i] {
			t.Fatalf("a continuation changed a closed day %d", i)
		}
	}
}

func TestAccumulateIntervals(t *testing.T) {
	// Hand arithmetic on the 10-degree rule (capacitor makers' application
	// notes): a part of 5000 h at 105 °C, no ripple term, lives 80 000 h at
	// 65 °C and 320 000 h at 45 °C.
	spec := noRippleSpec(5000, 105)
	p := DefaultCapacitorParams()
	p.Interval.FillAirC = 65
	t.Run("first reading contributes nothing", func(t *testing.T) {
		st, rep, _ := AccumulateCapacitor(spec, p, CapacitorState{}, constantSeries(testT0, 1, 60, 45, 0), LifeAirInputs{})
		if st.Damage != 0 || rep.Samples != 1 || !st.HasLast || st.LastAt != testT0 || st.FirstAt != testT0 {
			t.Fatalf("state %+v report %+v", st, rep)
		}
	})
	t.Run("nominal first interval", func(t *testing.T) {
		q := p
		q.Interval.FirstIntervalS = 3600
		st, _, _ := AccumulateCapacitor(spec, q, CapacitorState{}, constantSeries(testT0, 1, 60, 45, 0), LifeAirInputs{})
		if relDiff(st.Damage, 1.0/320000) > 1e-12 {
			t.Fatalf("damage %v, want one hour at 45 °C", st.Damage)
		}
	})
	t.Run("gap filled at the fill temperature", func(t *testing.T) {
		ss := constantSeries(testT0, 3, 3600, 45, 0)
		ss[2].At = ss[1].At + 5*3600 // a five-hour hole
		st, rep, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
		want := 1.0/320000 + 5.0/80000
		if rep.Gaps != 1 || rep.GapH != 5 || relDiff(st.Damage, want) > 1e-12 || st.Gaps != 1 || st.GapS != 5*3600 {
			t.Fatalf("damage %v (want %v), report %+v", st.Damage, want, rep)
		}
	})
	t.Run("gap limit is configurable", func(t *testing.T) {
		q := p
		q.Interval.MaxGapS = 6 * 3600
		ss := constantSeries(testT0, 3, 3600, 45, 0)
		ss[2].At = ss[1].At + 5*3600
		st, rep, _ := AccumulateCapacitor(spec, q, CapacitorState{}, ss, LifeAirInputs{})
		if rep.Gaps != 0 || relDiff(st.Damage, 6.0/320000) > 1e-12 {
			t.Fatalf("damage %v, report %+v", st.Damage, rep)
		}
	})
	t.Run("replays are skipped", func(t *testing.T) {
		ss := constantSeries(testT0, 100, 60, 45, 0)
		st, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
		st2, rep, _ := AccumulateCapacitor(spec, p, st, ss, LifeAirInputs{})
		if rep.Skipped != 100 || rep.DamageAdded != 0 || st2.Damage != st.Damage || st2.Skipped != 100 {
			t.Fatalf("replay report %+v", rep)
		}
	})
	t.Run("air source order and counts", func(t *testing.T) {
		// Intervals of one hour; the sources give 45, 45, 45+0 and 65 °C.
		ss := constantSeries(testT0, 6, 3600, 45, 0)
		ss[2].InternalAirC = math.NaN() // estimate 45
		ss[3].InternalAirC = math.NaN()
		ss[3].AmbientC = 41 // ambient + 4
		ss[4].InternalAirC = math.NaN()
		ss[4].AmbientC = 45             // ambient 45 + rise 4
		ss[5].InternalAirC = math.NaN() // nothing: fill 65
		est := []float64{math.NaN(), math.NaN(), 45}
		st, rep, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{InternalC: est, RiseOverAmbientC: 4})
		want := AirSourceCounts{Internal: 1, Estimated: 1, AmbientPlusRise: 2, Missing: 1}
		if rep.Air != want {
			t.Fatalf("air sources %+v, want %+v", rep.Air, want)
		}
		// Sample 4 took ambient 45 + rise 4 = 49 °C.
		wantD := 3.0/320000 + 1/spec.LifeH(49) + 1.0/80000
		if relDiff(st.Damage, wantD) > 1e-12 {
			t.Fatalf("damage %v, want %v", st.Damage, wantD)
		}
		_, rep, _ = AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
		if rep.Air.Ambient != 2 || rep.Air.Missing != 2 || rep.Air.Estimated != 0 {
			t.Fatalf("without estimates: %+v", rep.Air)
		}
	})
	t.Run("ripple assumptions when current is missing", func(t *testing.T) {
		s := rippleSpec()
		ss := constantSeries(testT0, 3, 3600, 100, math.NaN())
		ss[2].FrequencyHz = 0 // known stopped: no ripple
		st, _, _ := AccumulateCapacitor(s, p, CapacitorState{}, ss, LifeAirInputs{})
		// Interval 1: missing current, running: full ripple, core 105 °C;
		// interval 2: stopped, core 100 °C. Tref = 110 °C.
		want := 1/s.LifeH(105) + 1/s.LifeH(100)
		if relDiff(st.Damage, want) > 1e-12 {
			t.Fatalf("damage %v, want %v", st.Damage, want)
		}
	})
}

func TestLedgerDaysAndProjection(t *testing.T) {
	// Remaining life = (1 - D)/r with r the trailing-12-month rate
	// (DESIGN.md section 3); values by hand arithmetic on the 10-degree
	// rule: 5000 h at 105 °C gives 80 000 h at 65 °C.
	spec := noRippleSpec(5000, 105)
	p := DefaultCapacitorParams()
	t.Run("constant conditions", func(t *testing.T) {
		ss := constantSeries(testT0, 500*24+1, 3600, 65, 0)
		st, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
		if days := st.DayBuckets(); len(days) != 400 {
			t.Fatalf("%d day buckets, want the trailing 400", len(days))
		}
		var sum float64
		for _, d := range st.DayBuckets() {
			sum += d.Damage
		}
		if relDiff(sum, 400*24/80000.0) > 1e-9 {
			t.Fatalf("bucket damage %v, want 400 days at 65 °C", sum)
		}
		at := st.LastAt + 100*3600
		r, err := CapacitorLife(spec, p, st, at)
		if err != nil {
			t.Fatal(err)
		}
		d := 500 * 24 / 80000.0
		if relDiff(r.LifeUsedFraction, d) > 1e-12 || relDiff(r.DamageRatePerH, 1/80000.0) > 1e-9 {
			t.Fatalf("life used %v rate %v", r.LifeUsedFraction, r.DamageRatePerH)
		}
		wantRem := (1-d)*80000 - 100
		if relDiff(r.RemainingH, wantRem) > 1e-9 || relDiff(r.RemainingAtPresentH, wantRem) > 1e-9 {
			t.Fatalf("remaining %v / %v h, want %v", r.RemainingH, r.RemainingAtPresentH, wantRem)
		}
		wantEOL := st.LastAt + int64(math.Round((1-d)*80000*3600))
		if abs64(r.EndOfLifeAt-wantEOL) > 2 || !r.Projected || r.EndOfLifeEarliestAt != r.EndOfLifeAt || abs64(r.EndOfLifeLatestAt-r.EndOfLifeAt) > 2 {
			t.Fatalf("end of life %d (band %d..%d), want %d", r.EndOfLifeAt, r.EndOfLifeEarliestAt, r.EndOfLifeLatestAt, wantEOL)
		}
		if r.MeanTempC != 65 || relDiff(r.EquivalentCoreC, 65) > 1e-9 || r.RateWindowH != 365*24 || r.HoursSinceLast != 100 {
			t.Fatalf("mean %v equivalent %v window %v since %v", r.MeanTempC, r.EquivalentCoreC, r.RateWindowH, r.HoursSinceLast)
		}
		if len(r.BlockRatesPerH) != 12 {
			t.Fatalf("%d block rates, want 12", len(r.BlockRatesPerH))
		}
	})
	t.Run("hot recent month", func(t *testing.T) {
		// 335 days at 45 °C then 30 days at 65 °C: the 12-month rate is
		// (335*24/320000 + 30*24/80000)/(365*24); the 30-day rate 1/80 000.
		ss := constantSeries(testT0, 335*24+1, 3600, 45, 0)
		ss = append(ss, constantSeries(ss[len(ss)-1].At+3600, 30*24, 3600, 65, 0)...)
		st, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
		r, _ := CapacitorLife(spec, p, st, st.LastAt)
		d := 335*24/320000.0 + 30*24/80000.0
		rate := d / (365 * 24)
		if relDiff(r.LifeUsedFraction, d) > 1e-12 || relDiff(r.DamageRatePerH, rate) > 1e-9 || relDiff(r.PresentDamageRatePerH, 1/80000.0) > 1e-9 {
			t.Fatalf("D %v rate %v present %v", r.LifeUsedFraction, r.DamageRatePerH, r.PresentDamageRatePerH)
		}
		if relDiff(r.RemainingH, (1-d)/rate) > 1e-9 || relDiff(r.RemainingAtPresentH, (1-d)*80000) > 1e-9 {
			t.Fatalf("remaining %v at present %v", r.RemainingH, r.RemainingAtPresentH)
		}
		// Band: the harshest month is all 65 °C, the mildest all 45 °C.
		if want := st.LastAt + int64(math.Round((1-d)*80000*3600)); abs64(r.EndOfLifeEarliestAt-want) > 2 {
			t.Fatalf("earliest %d, want %d", r.EndOfLifeEarliestAt, want)
		}
		if want := st.LastAt + int64(math.Round((1-d)*320000*3600)); abs64(r.EndOfLifeLatestAt-want) > 2 {
			t.Fatalf("latest %d, want %d", r.EndOfLifeLatestAt, want)
		}
		if !(r.EndOfLifeEarliestAt < r.EndOfLifeAt && r.EndOfLifeAt < r.EndOfLifeLatestAt) {
			t.Fatalf("band %d < %d < %d does not hold", r.EndOfLifeEarliestAt, r.EndOfLifeAt, r.EndOfLifeLatestAt)
		}
	})
	t.Run("short history uses all of it", func(t *testing.T) {
		st, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, constantSeries(testT0, 24*10+1, 3600, 65, 0), LifeAirInputs{})
		r, _ := CapacitorLife(spec, p, st, st.LastAt)
		if r.RateWindowH != 240 || relDiff(r.DamageRatePerH, 1/80000.0) > 1e-9 || len(r.BlockRatesPerH) != 1 {
			t.Fatalf("window %v rate %v blocks %v", r.RateWindowH, r.DamageRatePerH, r.BlockRatesPerH)
		}
	})
	t.Run("end of life reached", func(t *testing.T) {
		// 5000 h at 105 °C: end of life after 5000 h at 105 °C.
		st, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, constantSeries(testT0, 6000+1, 3600, 105, 0), LifeAirInputs{})
		r, _ := CapacitorLife(spec, p, st, st.LastAt)
		want := testT0 + 5000*3600
		if !r.EndReached || abs64(r.EndReachedAt-want) > 1 || r.RemainingH != 0 || r.EndOfLifeAt != r.EndReachedAt {
			t.Fatalf("reached %v at %d (want %d), remaining %v", r.EndReached, r.EndReachedAt, want, r.RemainingH)
		}
	})
	t.Run("empty ledger", func(t *testing.T) {
		r, err := CapacitorLife(spec, p, CapacitorState{}, testT0)
		if err != nil || r.Projected || !math.IsInf(r.RemainingH, 1) || !math.IsNaN(r.MeanTempC) {
			t.Fatalf("report %+v err %v", r, err)
		}
	})
	t.Run("interval across midnight is split", func(t *testing.T) {
		ss := constantSeries(testT0-1800, 2, 3600, 65, 0) // 23:30 to 00:30
		st, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
		if days := st.DayBuckets(); len(days) != 2 || days[0].Seconds != 1800 || days[1].Seconds != 1800 {
			t.Fatalf("days %+v", days)
		}
	})
}

func TestStoredCapacitor(t *testing.T) {
	// A stored part ages at storage temperature without ripple (DESIGN.md
	// section 3); 10-degree rule: Tref = 110 °C for the default part, so
	// at 30 °C the life is 5000 * 2^8 = 1 280 000 h.
	spec := rippleSpec()
	d, err := StoredCapacitorDamage(spec, 30, 8760)
	if err != nil || relDiff(d, 8760/1280000.0) > 1e-12 {
		t.Fatalf("damage %v err %v", d, err)
	}
	st, err := AddStoredCapacitorPeriod(spec, CapacitorState{}, testT0, testT0+365*86400, 30)
	if err != nil || relDiff(st.Damage, d) > 1e-12 || st.LastAt != testT0+365*86400 || len(st.DayBuckets()) != 365 {
		t.Fatalf("state damage %v (want %v), %d days, err %v", st.Damage, d, len(st.DayBuckets()), err)
	}
	if _, err := AddStoredCapacitorPeriod(spec, st, testT0, testT0+10, 30); err == nil {
		t.Fatal("a period before the last reading was accepted")
	}
	// After stores, readings continue from the end of the period.
	st2, rep, _ := AccumulateCapacitor(spec, DefaultCapacitorParams(), st, constantSeries(st.LastAt+3600, 1, 60, 105, 37.3), LifeAirInputs{})
	if rep.Gaps != 0 || relDiff(st2.Damage-st.Damage, 1/5000.0) > 1e-9 {
		t.Fatalf("damage after stores %v, report %+v", st2.Damage-st.Damage, rep)
	}
}

func TestAggregatesAgreeWithRaw(t *testing.T) {
	// The roll-up keeps 1 °C time-at-temperature bins and current moments;
	// damage recomputed from it must agree with the raw minute readings
	// within 0.1 % (DESIGN.md section 4: life can still be recomputed).
	specs := []CapacitorSpec{rippleSpec(), {RatedLifeH: 5000, RatedTempC: 105, RatingIncludesRipple: true, RippleRiseC: 8, RippleRefCurrentA: 37.3, ActivationEnergyEV: 0.9}}
	p := DefaultCapacitorParams()
	ss := series(42, testT0, 60*24*60, 60, 37.3) // 60 days of minutes
	for i := 1000; i < 1300; i++ {               // a stretch with no air reading
		ss[i].InternalAirC, ss[i].AmbientC = math.NaN(), math.NaN()
	}
	for i := range ss[5000:] { // a five-hour hole
		ss[5000+i].At += 5 * 3600
	}
	for _, runs := range []FanRuns{FanAlways, FanWhenWarm} {
		ap := DefaultAggregateParams()
		ap.FanRuns, ap.FanSwitchOnC = runs, 52
		aggs, err := BuildHourAggregates(0, false, ss, LifeAirInputs{}, ap)
		if err != nil {
			t.Fatal(err)
		}
		if len(aggs) < 60*24 || len(aggs) > 60*24+6 {
			t.Fatalf("%d hourly aggregates for 60 days", len(aggs))
		}
		for _, spec := range specs {
			raw, rawRep, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
			agg, aggRep, err := AccumulateCapacitorAggregates(spec, p, CapacitorState{}, aggs)
			if err != nil {
				t.Fatal(err)
			}
			d := relDiff(raw.Damage, agg.Damage)
			t.Logf("%s, fan %s: aggregates differ from raw by %.2g", spec.Law(), runs, d)
			if d > 0.001 {
				t.Errorf("%s: raw %v, aggregates %v (rel %v)", spec.Law(), raw.Damage, agg.Damage, d)
			}
			if rawRep.Samples != aggRep.Samples || rawRep.Gaps != aggRep.Gaps || rawRep.Air != aggRep.Air || relDiff(rawRep.Hours, aggRep.Hours) > 1e-12 {
				t.Errorf("reports differ: raw %+v, aggregates %+v", rawRep, aggRep)
			}
			// Half aggregated, half raw.
			half, _, _ := AccumulateCapacitorAggregates(spec, p, CapacitorState{}, aggs[:700])
			var rest []Sample
			for _, s := range ss {
				if s.At > half.LastAt {
					rest = append(rest, s)
				}
			}
			mixed, _, _ := AccumulateCapacitor(spec, p, half, rest, LifeAirInputs{})
			if d := relDiff(raw.Damage, mixed.Damage); d > 0.001 {
				t.Errorf("%s: raw %v, aggregates then raw %v (rel %v)", spec.Law(), raw.Damage, mixed.Damage, d)
			}
		}
		fs := DefaultFanSpec()
		fs.Runs, fs.SwitchOnC = runs, 52
		fp := DefaultFanParams()
		raw, _, _ := AccumulateFan(fs, fp, FanState{}, ss, LifeAirInputs{})
		agg, _, _ := AccumulateFanAggregates(fs, fp, FanState{}, aggs)
		if d := relDiff(raw.Damage, agg.Damage); d > 0.001 || relDiff(raw.AgingS, agg.AgingS) > 1e-12 {
			t.Errorf("fan %s: raw %v (%v s running), aggregates %v (%v s)", runs, raw.Damage, raw.AgingS, agg.Damage, agg.AgingS)
		}
	}
}

func TestAggregatesCurrentSpreadCorrection(t *testing.T) {
	// A drive that runs at rated current half of each hour and stops for
	// the other half: the mean of 2^(x/10) is not 2^(mean/10), and the
	// second-order correction must bring the aggregate within 0.1 % of the
	// raw readings (cumulant expansion; arithmetic).
	spec := CapacitorSpec{RatedLifeH: 5000, RatedTempC: 105, RatingIncludesRipple: true, RippleRiseC: 5, RippleRefCurrentA: 10}
	var ss []Sample
	for i := 0; i < 24*60*10; i++ {
		s := constantSeries(testT0+int64(i)*60, 1, 60, 60.5, 10)[0]
		if (i/30)%2 == 1 {
			s.CurrentA, s.FrequencyHz = 0, 0
		}
		ss = append(ss, s)
	}
	aggs, _ := BuildHourAggregates(0, false, ss, LifeAirInputs{}, DefaultAggregateParams())
	p := DefaultCapacitorParams()
	raw, _, _ := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{})
	agg, _, _ := AccumulateCapacitorAggregates(spec, p, CapacitorState{}, aggs)
	d := relDiff(raw.Damage, agg.Damage)
	t.Logf("aggregates differ from raw by %.2g", d)
	if d > 0.001 {
		t.Fatalf("raw %v, aggregates %v (rel %v)", raw.Damage, agg.Damage, d)
	}
}

func TestParamsValidate(t *testing.T) {
	bad := []LifeIntervalParams{{MaxGapS: 0, FillAirC: 40}, {MaxGapS: 60, FirstIntervalS: 120, FillAirC: 40}, {MaxGapS: 60, FillAirC: math.NaN()}}
	for _, b := range bad {
		if b.Validate() == nil {
			t.Errorf("interval params %+v accepted", b)
		}
	}
	badP := []LifeProjectionParams{{TrailingDays: 500, PresentDays: 30, BlockDays: 30}, {TrailingDays: 365, PresentDays: 0, BlockDays: 30}, {TrailingDays: 365, PresentDays: 30, BlockDays: 0}}
	for _, b := range badP {
		if b.Validate() == nil {
			t.Errorf("projection params %+v accepted", b)
		}
	}
	p := DefaultCapacitorParams()
	p.CapacitanceEndFraction = 1.2
	if _, _, err := AccumulateCapacitor(rippleSpec(), p, CapacitorState{}, nil, LifeAirInputs{}); err == nil {
		t.Error("bad capacitor params accepted")
	}
	if _, _, err := AccumulateCapacitor(DefaultCapacitorSpec(), DefaultCapacitorParams(), CapacitorState{}, nil, LifeAirInputs{}); err == nil {
		t.Error("a spec with a ripple term and no reference current was accepted")
	}
}

func TestFastExp2AgainstMathExp2(t *testing.T) {
	// Reference: the standard library's math.Exp2.
	tab := newExp2Table()
	for j, v := range tab {
		// Within one unit in the last place (math.Exp2 itself is not
		// always correctly rounded: it gives 1.414213562373095 for 2^0.5).
		want := math.Exp2(float64(j) / 64)
		if math.Abs(v-want) > math.Nextafter(want, 2)-want {
			t.Errorf("anchor %d: %v, math.Exp2 %v", j, v, want)
		}
	}
	if tab[32] != math.Sqrt2 || tab[16] != math.Sqrt(math.Sqrt2) {
		t.Errorf("anchors 2^(1/2) %v and 2^(1/4) %v are not correctly rounded", tab[32], tab[16])
	}
	if tab.exp2(0) != 1 {
		t.Fatalf("exp2(0) = %v, want exactly 1", tab.exp2(0))
	}
	rng := rand.New(rand.NewPCG(5, 8))
	worst := 0.0
	for i := 0; i < 1_000_000; i++ {
		x := -60 + 80*rng.Float64()
		if i%10 == 0 {
			x = -1000 + 2000*rng.Float64()
		}
		worst = math.Max(worst, relDiff(tab.exp2(x), math.Exp2(x)))
	}
	if worst > 1e-15 { // a few units in the last place
		t.Fatalf("worst relative difference from math.Exp2 %v", worst)
	}
	for _, x := range []float64{math.NaN(), math.Inf(1), math.Inf(-1), 1100, -1100} {
		got, want := tab.exp2(x), math.Exp2(x)
		if got != want && !(math.IsNaN(got) && math.IsNaN(want)) {
			t.Errorf("exp2(%v) = %v, want %v", x, got, want)
		}
	}
	// The hot-path damage rate agrees with the exported life law.
	for _, spec := range []CapacitorSpec{rippleSpec(), {RatedLifeH: 5000, RatedTempC: 105, ActivationEnergyEV: 0.8}} {
		law := newCapLaw(spec)
		for c := -20.0; c < 140; c += 0.37 {
			if d := relDiff(law.rateS(c), 1/(spec.LifeH(c)*3600)); d > 1e-14 {
				t.Fatalf("%s at %v °C: rate and life differ by %v", spec.Law(), c, d)
			}
		}
	}
}
