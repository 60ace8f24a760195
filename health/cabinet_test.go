package health

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/unit/constant"
)

func TestHeatTransferCoefficient(t *testing.T) {
	// Enclosure design notes (DESIGN.md section 3): 5.5 painted steel, 3.7
	// stainless, 3.5 plastic W/m²K; aluminium 12 W/m²K from memory.
	want := map[Material]float64{MaterialPaintedSteel: 5.5, MaterialStainless: 3.7, MaterialPlastic: 3.5, MaterialAluminium: 12}
	for _, m := range Materials() {
		if got := HeatTransferCoefficient(m); got != want[m] {
			t.Errorf("HeatTransferCoefficient(%s) = %v, want %v", m, got, want[m])
		}
	}
	if !math.IsNaN(HeatTransferCoefficient("wood")) {
		t.Error("an unknown material gave a coefficient")
	}
}

func TestSealedCabinetCheckValue(t *testing.T) {
	// Enclosure design notes check value: 500 W at dT 15 K in painted sheet
	// steel (k = 5.5 W/m²K) needs A = 500 / (5.5 × 15) = 6.06 m².
	c := Cabinet{Cooling: CoolingSealed, Material: MaterialPaintedSteel, EffectiveAreaM2: 6.06}
	h, err := CabinetAir(c, 30, 500, 0, DefaultCabinetParams())
	if err != nil {
		t.Fatal(err)
	}
	if !dutyNear(h.RiseK, 15, 0.01) || !dutyNear(h.InternalAirC, 45, 0.01) {
		t.Errorf("500 W in 6.06 m² of painted steel: rise %v K, air %v °C; want 15 K, 45 °C", h.RiseK, h.InternalAirC)
	}
	// The same balance the other way for every material: rise = P / (k A).
	for _, m := range Materials() {
		c := Cabinet{Cooling: CoolingSealed, Material: m, EffectiveAreaM2: 4}
		h, _ := CabinetAir(c, 20, 300, 0, DefaultCabinetParams())
		if want := 300 / (HeatTransferCoefficient(m) * 4); !dutyNear(h.RiseK, want, 1e-12) {
			t.Errorf("%s: rise %v, want %v", m, h.RiseK, want)
		}
	}
}

func TestEffectiveArea(t *testing.T) {
	// IEC TR 60890 surface factors (from memory): exposed top 1.4, covered
	// top 0.7, exposed side 0.9, covered side 0.5, floor 0. A cabinet 2.0 m
	// high, 0.8 m wide, 0.6 m deep: top 0.48 m², front and rear 1.6 m²
	// each, sides 1.2 m² each. Sums worked by hand:
	cases := []struct {
		placement CabinetPlacement
		topCover  bool
		want      float64
	}{
		{PlacementFreeStanding, false, 1.4*0.48 + 0.9*3.2 + 0.9*2.4}, // 5.712
		{"", false, 5.712}, // empty reads as free-standing
		{PlacementAgainstWall, false, 1.4*0.48 + 0.9*1.6 + 0.5*1.6 + 0.9*2.4}, // 5.072
		{PlacementRowEnd, false, 1.4*0.48 + 0.9*3.2 + 0.9*1.2 + 0.5*1.2},      // 5.232
		{PlacementRowEndAgainstWall, false, 0.672 + 1.44 + 0.8 + 1.08 + 0.6},  // 4.592
		{PlacementRowMiddle, false, 0.672 + 2.88 + 0.5*2.4},                   // 4.752
		{PlacementRowMiddleAgainstWall, false, 0.672 + 1.44 + 0.8 + 1.2},      // 4.112
		{PlacementRowMiddleAgainstWall, true, 0.7*0.48 + 1.44 + 0.8 + 1.2},    // 3.776
		{PlacementFreeStanding, true, 0.7*0.48 + 0.9*3.2 + 0.9*2.4},           // 5.376
	}
	for _, c := range cases {
		cab := Cabinet{HeightM: 2, WidthM: 0.8, DepthM: 0.6, Placement: c.placement, TopCovered: c.topCover}
		got, err := cab.EffectiveArea()
		if err != nil {
			t.Fatalf("%s: %v", c.placement, err)
		}
		if !dutyNear(got, c.want, 1e-12) {
			t.Errorf("%s (top covered %v): A_eff %v, want %v", c.placement, c.topCover, got, c.want)
		}
	}
	if got, _ := (Cabinet{EffectiveAreaM2: 3.3, HeightM: 2, WidthM: 1, DepthM: 1}).EffectiveArea(); got != 3.3 {
		t.Errorf("a registered effective area was not used: %v", got)
	}
	for _, bad := range []Cabinet{{HeightM: 2, WidthM: 0.8}, {HeightM: 2, WidthM: 0.8, DepthM: 0.6, Placement: "on_a_pole"}} {
		if _, err := bad.EffectiveArea(); err == nil {
			t.Errorf("%+v gave no error", bad)
		}
	}
}

func TestVentilatedCabinet(t *testing.T) {
	// Physics: dT = P / (rho·cp × V). Worked by hand: 1000 W with 300 m³/h
	// (0.0833 m³/s) and rho·cp = 1200 J/(m³K) gives 1000 / 100 = 10 K.
	c := Cabinet{Cooling: CoolingFanVentilated, AirflowM3H: 300}
	h, err := CabinetAir(c, 25, 1000, 0, DefaultCabinetParams())
	if err != nil {
		t.Fatal(err)
	}
	if !dutyNear(h.RiseK, 10, 1e-9) || !dutyNear(h.InternalAirC, 35, 1e-9) {
		t.Errorf("1000 W at 300 m³/h: rise %v K, want 10 K", h.RiseK)
	}
	// Second formulation: rho from the ideal-gas law with gonum's Boltzmann
	// and Avogadro constants (R = k·N_A), molar mass of dry air 28.965 g/mol
	// and cp = 1005 J/(kg·K) at 20 °C (from memory), sea-level pressure
	// 101 325 Pa. rho·cp comes to about 1210 J/(m³K): the 1.2 kJ/(m³K)
	// rounding must agree within 1 %.
	r := float64(constant.Boltzmann) * float64(constant.Avogadro)
	rho := 101325 * 0.028965 / (r * 293.15)
	rhoCp := rho * 1005
	if want := 1000 / (rhoCp * 300 / 3600); math.Abs(h.RiseK-want)/want > 0.01 {
		t.Errorf("rise %v K differs from the ideal-gas formulation %v K by more than 1 %%", h.RiseK, want)
	}
	if _, err := CabinetAir(Cabinet{Cooling: CoolingFanVentilated}, 25, 1000, 0, DefaultCabinetParams()); err == nil {
		t.Error("a ventilated cabinet without air flow gave no error")
	}
}

func TestAirConditionedCabinet(t *testing.T) {
	// Cooler rating: holds the set point while the load is within capacity;
	// beyond it the excess heats like a sealed cabinet. k·A = 5.5 × 5 = 27.5 W/K.
	c := Cabinet{Cooling: CoolingAirConditioned, Material: MaterialPaintedSteel, EffectiveAreaM2: 5, CoolerCapacityW: 1000, SetPointC: 35}
	cases := []struct {
		name             string
		ambientC, lossW  float64
		wantAir, wantQ   float64
		wantOverCapacity bool
	}{
		// Q = 600 + 27.5 × (45 - 35) = 875 W <= 1000 W: set point.
		{"within capacity", 45, 600, 35, 875, false},
		// Q = 900 + 275 = 1175 W > 1000 W: T = 35 + 175 / 27.5 = 41.36 °C
		// (= 45 + (900 - 1000) / 27.5).
		{"over capacity", 45, 900, 35 + 175/27.5, 1175, true},
		// Cool day: sealed air 10 + 200 / 27.5 = 17.3 °C is below the set point; the cooler idles.
		{"cooler idle", 10, 200, 10 + 200/27.5, 0, false},
	}
	for _, cs := range cases {
		h, err := CabinetAir(c, cs.ambientC, cs.lossW, 0, DefaultCabinetParams())
		if err != nil {
			t.Fatalf("%s: %v", cs.name, err)
		}
		if !dutyNear(h.InternalAirC, cs.wantAir, 1e-9) || !dutyNear(h.CoolerLoadW, cs.wantQ, 1e-9) || h.OverCapacity != cs.wantOverCapacity {
			t.Errorf("%s: %+v; want air %v, load %v, over %v", cs.name, h, cs.wantAir, cs.wantQ, cs.wantOverCapacity)
		}
	}
	// The balance is continuous where the load meets the capacity: Q = C
	// at 45 °C needs losses of 1000 - 275 = 725 W.
	lo, _ := CabinetAir(c, 45, 725-1e-6, 0, DefaultCabinetParams())
	hi, _ := CabinetAir(c, 45, 725+1e-6, 0, DefaultCabinetParams())
	if math.Abs(lo.InternalAirC-hi.InternalAirC) > 1e-6 {
		t.Errorf("discontinuity at capacity: %v vs %v", lo.InternalAirC, hi.InternalAirC)
	}
	noArea := c
	noArea.EffectiveAreaM2 = 0
	if _, err := CabinetAir(noArea, 45, 600, 0, DefaultCabinetParams()); err == nil {
		t.Error("an air-conditioned cabinet without area gave no error")
	}
}

func TestSolarGain(t *testing.T) {
	// Design irradiance 1000 W/m² × absorptance × sunlit area (DESIGN.md
	// section 3). Cabinet 2.0 × 0.8 × 0.6 m: full sun lights the top
	// (0.48 m²) and the larger side (front, 1.6 m²) = 2.08 m²; partial half.
	base := Cabinet{HeightM: 2, WidthM: 0.8, DepthM: 0.6}
	cases := []struct {
		name  string
		sun   Sun
		paint Paint
		alpha float64
		want  float64
	}{
		{"white, full sun", SunFull, PaintWhite, 0, 0.25 * 1000 * 2.08},
		{"black, full sun", SunFull, PaintBlack, 0, 0.90 * 1000 * 2.08},
		{"white, partial sun", SunPartial, PaintWhite, 0, 0.25 * 1000 * 1.04},
		{"no sun", SunNone, PaintBlack, 0, 0},
		{"plain absorptance wins", SunFull, PaintBlack, 0.3, 0.3 * 1000 * 2.08},
	}
	for _, c := range cases {
		cab := base
		cab.Sun, cab.Paint, cab.Absorptance = c.sun, c.paint, c.alpha
		got, err := cab.SolarGainW(1000, 1)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if !dutyNear(got, c.want, 1e-9) {
			t.Errorf("%s: %v W, want %v W", c.name, got, c.want)
		}
	}
	// Absorptance bounds from DESIGN.md: 0.2-0.3 fresh white, 0.9 black; the
	// other paints lie between and rise with darkness.
	prev := 0.0
	for _, p := range Paints() {
		a := p.Absorptance()
		if !(a > prev && a >= 0.2 && a <= 0.9) {
			t.Errorf("paint %s absorptance %v out of order or range", p, a)
		}
		prev = a
	}
	if white := PaintWhite.Absorptance(); white < 0.2 || white > 0.3 {
		t.Errorf("white absorptance %v outside 0.2-0.3", white)
	}
	if _, err := (Cabinet{Sun: SunFull, EffectiveAreaM2: 4}).SolarGainW(1000, 1); err == nil {
		t.Error("a sunlit cabinet without dimensions or sunlit area gave no error")
	}
}

func TestDriveLossesW(t *testing.T) {
	r := dutyTestRatings() // 55 kW normal duty at 100 A; 2.5 % losses = 1375 W (common practice)
	m := DefaultLossModel()
	if s := m.Fixed + m.Linear + m.Quadratic; !dutyNear(s, 1, 1e-12) {
		t.Fatalf("loss model sums to %v, want 1", s)
	}
	cases := []struct{ current, want float64 }{
		{100, 1375},                            // rated point: the rated losses
		{0, 0.15 * 1375},                       // stopped: the fixed part
		{50, 1375 * (0.15 + 0.25 + 0.35*0.25)}, // half load, by hand 670.3 W
		{-50, 1375 * (0.15 + 0.25 + 0.35*0.25)},
	}
	for _, c := range cases {
		if got := DriveLossesW(r, DutyNormal, m, c.current); !dutyNear(got, c.want, 1e-9) {
			t.Errorf("DriveLossesW(%v A) = %v, want %v", c.current, got, c.want)
		}
	}
	if !math.IsNaN(DriveLossesW(r, DutyNormal, m, math.NaN())) {
		t.Error("NaN current gave a number")
	}
}

// dutyKiosk is a small sealed painted-steel kiosk, 1.2 m × 0.8 m × 0.4 m
// against a wall, holding a 7.5 kW drive (18 A, rated 40 °C, max 50 °C).
func dutyKiosk(sun Sun) (Cabinet, Ratings) {
	r := DefaultRatings(400)
	r.NormalDutyA, r.NormalDutyKW = 18, 7.5
	c := Cabinet{Cooling: CoolingSealed, Material: MaterialPaintedSteel, HeightM: 1.2, WidthM: 0.8, DepthM: 0.4,
		Placement: PlacementAgainstWall, Sun: sun, Paint: PaintWhite}
	return c, r
}

func TestAssessCabinet(t *testing.T) {
	// Kiosk by hand: A_eff = 1.4×0.32 + 0.9×0.96 + 0.5×0.96 + 0.9×0.96 =
	// 2.656 m², k·A = 14.608 W/K; drive losses 2.5 % × 7.5 kW = 187.5 W
	// (common practice) at rated current; white paint in full sun 0.25 ×
	// 1000 × (0.32 + 0.96) = 320 W.
	p := DefaultCabinetParams()
	cases := []struct {
		name    string
		sun     Sun
		designC float64
		wantAir float64
		want    []string
	}{
		{"indoor, cool room", SunNone, 25, 25 + 187.5/14.608, nil},
		{"indoor, warm room", SunNone, 30, 30 + 187.5/14.608, []string{"environment.cabinet_air_above_rating:major"}},
		{"full sun", SunFull, 35, 35 + 507.5/14.608, []string{"environment.cabinet_air_above_rating:critical"}},
	}
	for _, c := range cases {
		cab, r := dutyKiosk(c.sun)
		a, err := AssessCabinet(CabinetInput{Cabinet: cab, Ratings: r, Duty: DutyNormal, DesignAmbientMaxC: c.designC, DesignCurrentA: math.NaN()}, p)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if !dutyNear(a.Heat.InternalAirC, c.wantAir, 1e-6) {
			t.Errorf("%s: internal air %v, want %v", c.name, a.Heat.InternalAirC, c.wantAir)
		}
		if got := dutyRuleIDs(a.Findings); !slices.Equal(got, c.want) {
			t.Errorf("%s: findings %v, want %v", c.name, got, c.want)
		}
		for _, f := range a.Findings {
			dutyCheckFinding(t, f)
		}
	}
	// An air-conditioned cabinet over capacity raises both rules.
	cab, r := dutyKiosk(SunFull)
	cab.Cooling, cab.CoolerCapacityW, cab.SetPointC = CoolingAirConditioned, 300, 35
	a, err := AssessCabinet(CabinetInput{Cabinet: cab, Ratings: r, Duty: DutyNormal, DesignAmbientMaxC: 40}, p)
	if err != nil {
		t.Fatal(err)
	}
	// Q = 187.5 + 320 + 14.608 × 5 = 580.5 W > 300 W; T = 35 + 280.5 / 14.608 = 54.2 °C.
	if got := dutyRuleIDs(a.Findings); !slices.Equal(got, []string{"environment.cabinet_air_above_rating:critical", "environment.cabinet_cooling_capacity:major"}) {
		t.Errorf("air-conditioned over capacity: %v", got)
	}
	if !dutyNear(a.Heat.InternalAirC, 35+(187.5+320+14.608*5-300)/14.608, 1e-6) {
		t.Errorf("air-conditioned over capacity: air %v", a.Heat.InternalAirC)
	}
	cab.CoolerCapacityW = 1000
	a, _ = AssessCabinet(CabinetInput{Cabinet: cab, Ratings: r, Duty: DutyNormal, DesignAmbientMaxC: 40}, p)
	if len(a.Findings) != 0 || a.Heat.InternalAirC != 35 {
		t.Errorf("air-conditioned within capacity: %v at %v °C", dutyRuleIDs(a.Findings), a.Heat.InternalAirC)
	}
}

func TestCabinetModelPerSample(t *testing.T) {
	cab, r := dutyKiosk(SunFull)
	p := DefaultCabinetParams()
	m, err := NewCabinetModel(cab, r, DutyNormal, p)
	if err != nil {
		t.Fatal(err)
	}
	s := dutySample(0, 9, math.NaN()) // half load
	s.AmbientC = 20
	loss := DriveLossesW(r, DutyNormal, p.Losses, 9)
	// Sealed balance with 0.3 of the design sun: 320 W × 0.3 = 96 W.
	want := 20 + (loss+96)/14.608
	if got := m.EstimateInternalAirC(s); !dutyNear(got, want, 1e-6) {
		t.Errorf("EstimateInternalAirC = %v, want %v", got, want)
	}
	if got := m.AirAtDriveC(s); got != m.EstimateInternalAirC(s) {
		t.Errorf("AirAtDriveC without a reading = %v", got)
	}
	s.InternalAirC = 33
	if got := m.AirAtDriveC(s); got != 33 {
		t.Errorf("AirAtDriveC with a reading = %v, want 33", got)
	}
	s.AmbientC = math.NaN()
	if !math.IsNaN(m.EstimateInternalAirC(s)) {
		t.Error("no ambient gave an estimate")
	}
	if _, err := NewCabinetModel(Cabinet{Cooling: CoolingSealed}, r, DutyNormal, p); err == nil {
		t.Error("a cabinet without area gave a model")
	}
}

func TestCabinetAirProperties(t *testing.T) {
	// The air inside never falls below the air outside for sealed and
	// ventilated cabinets, and never cools when losses or ambient rise.
	rng := rand.New(rand.NewPCG(11, 12))
	p := DefaultCabinetParams()
	for i := range 5000 {
		c := Cabinet{Cooling: []Cooling{CoolingSealed, CoolingFanVentilated, CoolingAirConditioned}[rng.IntN(3)],
			Material: Materials()[rng.IntN(4)], HeightM: 0.3 + 2*rng.Float64(), WidthM: 0.3 + rng.Float64(), DepthM: 0.2 + 0.6*rng.Float64(),
			Placement: CabinetPlacements()[rng.IntN(6)], Sun: Suns()[rng.IntN(3)], Paint: Paints()[rng.IntN(5)],
			AirflowM3H: 50 + 1000*rng.Float64(), CoolerCapacityW: 100 + 3000*rng.Float64(), SetPointC: 25 + 15*rng.Float64()}
		amb, loss := -20+70*rng.Float64(), 3000*rng.Float64()
		h, err := CabinetAir(c, amb, loss, rng.Float64(), p)
		if err != nil {
			t.Fatalf("case %d: %v", i, err)
		}
		if c.Cooling != CoolingAirConditioned && h.InternalAirC < amb {
			t.Fatalf("case %d: %s air %v below ambient %v", i, c.Cooling, h.InternalAirC, amb)
		}
		h2, _ := CabinetAir(c, amb+rng.Float64()*5, loss+rng.Float64()*200, 0, p)
		h3, _ := CabinetAir(c, amb, loss, 0, p)
		if h2.InternalAirC < h3.InternalAirC-1e-9 {
			t.Fatalf("case %d: hotter and lossier gave cooler air: %v < %v", i, h2.InternalAirC, h3.InternalAirC)
		}
	}
}

func BenchmarkEstimateInternalAirC(b *testing.B) {
	cab, r := dutyKiosk(SunFull)
	m, err := NewCabinetModel(cab, r, DutyNormal, DefaultCabinetParams())
	if err != nil {
		b.Fatal(err)
	}
	s := dutySample(0, 12, math.NaN())
	s.AmbientC = 31
	for b.Loop() {
		m.EstimateInternalAirC(s)
	}
}

func BenchmarkDriveLossesW(b *testing.B) {
	r := dutyTestRatings()
	m := DefaultLossModel()
	for b.Loop() {
		DriveLossesW(r, DutyNormal, m, 63)
	}
}
