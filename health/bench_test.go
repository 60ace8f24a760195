package health

import (
	"testing"
)

// BenchmarkCapacitorAccumulate measures life accumulation over minute
// readings with internal air and current logged, the common case. The
// target is at least 20 million readings per second per core.
func BenchmarkCapacitorAccumulate(b *testing.B) {
	spec := rippleSpec()
	p := DefaultCapacitorParams()
	ss := series(9, testT0, 200_000, 60, 37.3)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, _, err := AccumulateCapacitor(spec, p, CapacitorState{}, ss, LifeAirInputs{}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(ss))*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}

// BenchmarkCapacitorAccumulateChunks feeds the same readings as an
// incremental job would, an hour of minutes at a time.
func BenchmarkCapacitorAccumulateChunks(b *testing.B) {
	spec := rippleSpec()
	p := DefaultCapacitorParams()
	ss := series(9, testT0, 200_000, 60, 37.3)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		var st CapacitorState
		var err error
		for lo := 0; lo < len(ss); lo += 60 {
			if st, _, err = AccumulateCapacitor(spec, p, st, ss[lo:min(lo+60, len(ss))], LifeAirInputs{}); err != nil {
				b.Fatal(err)
			}
		}
	}
	b.ReportMetric(float64(len(ss))*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}

// BenchmarkFanAccumulate measures fan life accumulation on the same
// readings.
func BenchmarkFanAccumulate(b *testing.B) {
	spec := DefaultFanSpec()
	spec.Runs = FanWhenWarm
	p := DefaultFanParams()
	ss := series(9, testT0, 200_000, 60, 37.3)
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		if _, _, err := AccumulateFan(spec, p, FanState{}, ss, LifeAirInputs{}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(ss))*float64(b.N)/b.Elapsed().Seconds(), "readings/s")
}
