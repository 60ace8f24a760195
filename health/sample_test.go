package health

import (
	"math"
	"math/rand/v2"
	"reflect"
	"testing"
)

// TestLedgersReadOnlyLedgerFields checks LedgerSample's promise: the life
// ledgers and the cabinet air estimate come out the same, bit for bit,
// when the fields only the window checks read are dropped. A full
// recompute relies on it to read old readings narrowly.
func TestLedgersReadOnlyLedgerFields(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 13))
	spec := rippleSpec()
	cab, r := dutyKiosk(SunFull)
	cabinet, err := NewCabinetModel(cab, r, DutyNormal, DefaultCabinetParams())
	if err != nil {
		t.Fatal(err)
	}
	for k, runs := range []FanRuns{FanAlways, FanWhenWarm} {
		fspec := DefaultFanSpec()
		fspec.Runs = runs
		ss := series(uint64(k)+1, testT0, 5000, 3600, 37.3)
		for i := range ss {
			s := &ss[i]
			s.PeakCurrentA = s.CurrentA * (1 + rng.Float64())
			s.BusV, s.BusRippleV = 560+rng.NormFloat64()*5, rng.Float64()*20
			s.CapacitanceUF, s.ESRMilliohm = 4700*(1-rng.Float64()*0.1), 20+rng.Float64()
			if i%7 == 0 {
				s.InternalAirC = math.NaN() // the estimate is used
			}
		}
		narrow := make([]Sample, len(ss))
		est, estNarrow := make([]float64, len(ss)), make([]float64, len(ss))
		for i, s := range ss {
			narrow[i] = LedgerSample(s)
			est[i], estNarrow[i] = cabinet.EstimateInternalAirC(s), cabinet.EstimateInternalAirC(narrow[i])
		}
		if !reflect.DeepEqual(est, estNarrow) {
			t.Fatalf("%v: the cabinet estimate read a window-only field", runs)
		}
		air := LifeAirInputs{InternalC: est, RiseOverAmbientC: 4}
		capFull, _, err := AccumulateCapacitor(spec, DefaultCapacitorParams(), CapacitorState{}, ss, air)
		if err != nil {
			t.Fatal(err)
		}
		capNarrow, _, err := AccumulateCapacitor(spec, DefaultCapacitorParams(), CapacitorState{}, narrow, air)
		if err != nil {
			t.Fatal(err)
		}
		fanFull, _, err := AccumulateFan(fspec, DefaultFanParams(), FanState{}, ss, air)
		if err != nil {
			t.Fatal(err)
		}
		fanNarrow, _, err := AccumulateFan(fspec, DefaultFanParams(), FanState{}, narrow, air)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(capFull, capNarrow) || !reflect.DeepEqual(fanFull, fanNarrow) {
			t.Errorf("%v: a life ledger read a window-only field", runs)
		}
		if capFull.Damage <= 0 || fanFull.Damage <= 0 {
			t.Errorf("%v: no damage accrued (capacitor %v, fan %v): the check compares nothing", runs, capFull.Damage, fanFull.Damage)
		}
	}
}
