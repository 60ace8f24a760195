package demo

import (
	"math"
	"slices"
	"strings"
	"testing"
	"time"

	"kelvard/health"
)

// TestPlantedRulesAreRaised checks every planted problem: the health
// models raise its rule on its position, and the expected findings list
// it. Capacitor and storage rules have no model in package health yet; the
// tests below size them by hand.
func TestPlantedRulesAreRaised(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	ex := expected(t)
	for _, pl := range s.Planted {
		if !slices.Contains(ex.Findings, ExpectedFinding{pl.Subject, pl.Rule}) {
			t.Errorf("expected findings miss planted %s %s", pl.Subject, pl.Rule)
		}
		kind, _, _ := strings.Cut(pl.Rule, ".")
		if kind == string(health.KindCapacitor) || kind == string(health.KindStorage) {
			continue
		}
		fs, err := s.PositionFindings(pl.Subject)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Contains(rules(fs), pl.Rule) {
			t.Errorf("%s (%s): the health models do not raise %s; they raise %v", pl.Subject, pl.What, pl.Rule, rules(fs))
		}
	}
}

// judge runs health.JudgeEnclosure for the drive standing at a position.
func judge(t *testing.T, s *Scenario, tag string) health.EnclosureReport {
	t.Helper()
	pos, _ := s.Position(tag)
	d, _ := s.InstalledDrive(tag)
	m, _ := s.Model(d.Model)
	a, _ := s.AreaOf(pos)
	h, err := housingOf(pos.Position, m)
	if err != nil {
		t.Fatal(err)
	}
	return health.JudgeEnclosure(a.Environment.Health(), h)
}

type ruleSeverity struct {
	rule string
	sev  health.Severity
}

func ruleSeverities(fs []health.Finding) []ruleSeverity {
	var out []ruleSeverity
	for _, f := range fs {
		out = append(out, ruleSeverity{f.Rule, f.Severity})
	}
	return out
}

// TestPlantedEnclosures pins what health.JudgeEnclosure answers for the
// three planted enclosure and board problems.
func TestPlantedEnclosures(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	cases := []struct {
		tag  string
		want []ruleSeverity
	}{
		// An indoor-only NEMA Type 1 / IP21 drive on the sunny, salty,
		// sandy intake deck: critical for outdoors; the water, dust,
		// corrosion and board gaps as findings; sun and condensation as
		// verify items.
		{tag(tagIntake, tagKindPump, 1), []ruleSeverity{
			{"enclosure.outdoor", health.SeverityCritical},
			{"enclosure.water", health.SeverityMinor},
			{"enclosure.dust", health.SeverityMajor},
			{"enclosure.corrosion", health.SeverityMinor},
			{"enclosure.sun", health.SeverityAdvice},
			{"enclosure.condensation", health.SeverityAdvice},
			{"environment.board_corrosion", health.SeverityMinor},
		}},
		// An open-chassis IP20 drive in the hose-down hall: no water
		// protection at all against hose-down is critical.
		{tag(tagDewater, tagKindMix, 1), []ruleSeverity{
			{"enclosure.water", health.SeverityCritical},
			{"enclosure.corrosion", health.SeverityAdvice},
			{"enclosure.condensation", health.SeverityAdvice},
			{"environment.board_corrosion", health.SeverityMinor},
		}},
		// Uncoated boards in a Type 4X case in the G3 dosing room: the
		// case passes everything, the boards do not.
		{tag(tagDosing, tagKindPump, 2), []ruleSeverity{
			{"environment.board_corrosion", health.SeverityMajor},
		}},
	}
	for _, c := range cases {
		got := ruleSeverities(judge(t, s, c.tag).Findings)
		if !slices.Equal(got, c.want) {
			t.Errorf("%s: JudgeEnclosure raises %v, want %v", c.tag, got, c.want)
		}
	}
	// Its neighbours in the dosing room, coated, raise nothing.
	for _, n := range []int{1, 3, 4, 5, 6} {
		if fs := judge(t, s, tag(tagDosing, tagKindPump, n)).Findings; len(fs) != 0 {
			t.Errorf("DOS-P%02d: JudgeEnclosure raises %v, want nothing", n, rules(fs))
		}
	}
}

// TestPlantedCabinet checks the sealed sunlit cabinet: health.AssessCabinet
// predicts air far above the drive's rated ambient at the design point, and
// the logged cabinet air runs above the rated ambient on summer days.
func TestPlantedCabinet(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	tg := tag(tagIntake, tagKindScr, 1)
	pos, _ := s.Position(tg)
	d, _ := s.InstalledDrive(tg)
	m, _ := s.Model(d.Model)
	a, _ := s.AreaOf(pos)
	env := a.Environment.Health()
	cab, err := health.AssessCabinet(health.CabinetInput{Cabinet: cabinetOf(pos.Cabinet, env.Sun), Ratings: ratingsOf(m),
		Duty: pos.Duty, DesignAmbientMaxC: env.AmbientMaxC, DesignCurrentA: math.NaN()}, health.DefaultCabinetParams())
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Contains(rules(cab.Findings), "environment.cabinet_air_above_rating") || cab.Heat.InternalAirC < m.RatedAmbientC+10 {
		t.Errorf("AssessCabinet predicts %.1f °C (rated %.0f °C) and raises %v", cab.Heat.InternalAirC, m.RatedAmbientC, rules(cab.Findings))
	}
	if cab.Heat.SolarW <= 0 || pos.Cabinet.Cooling != health.CoolingSealed {
		t.Errorf("the planted cabinet must be sealed and in the sun: solar gain %v W, cooling %s", cab.Heat.SolarW, pos.Cabinet.Cooling)
	}
	over, summer, summerOver := 0, 0, 0
	rs := s.PositionReadings(tg)
	for _, r := range rs {
		if r.InternalAirC > m.RatedAmbientC {
			over++
		}
		if mo := r.At.Add(localOffset).Month(); mo >= time.June && mo <= time.September {
			summer++
			if r.InternalAirC > m.RatedAmbientC {
				summerOver++
			}
		}
	}
	if share := float64(summerOver) / float64(summer); share < 0.25 {
		t.Errorf("cabinet air above the rated %.0f °C in %.0f %% of summer hours, want at least a quarter", m.RatedAmbientC, 100*share)
	}
	if over < 500 {
		t.Errorf("cabinet air above the rated ambient in %d hours of the year, want at least 500", over)
	}
	// The other cabinets (air-conditioned lift station panels) hold their
	// set point and raise nothing.
	for i := 1; i <= 16; i++ {
		tl := tag(tagLift, tagKindPump, i)
		fs, _ := s.PositionFindings(tl)
		for _, r := range rules(fs) {
			if strings.HasPrefix(r, "environment.cabinet") {
				t.Errorf("%s raises %s", tl, r)
			}
		}
	}
}

// duty runs health.AssessDuty as ExpectedFindings does, over the given
// window, with the air at the drive given.
func duty(t *testing.T, s *Scenario, tg string, win time.Duration, airC float64) health.DutyAssessment {
	t.Helper()
	pos, _ := s.Position(tg)
	d, _ := s.InstalledDrive(tg)
	m, _ := s.Model(d.Model)
	a, _ := s.AreaOf(pos)
	site, _ := s.SiteOf(pos.Site)
	design := a.Environment.AmbientMaxC
	if pos.Mounting == health.MountingCabinet {
		design = math.NaN()
	}
	out, err := health.AssessDuty(health.DutyInput{
		Ratings: ratingsOf(m),
		Application: health.Application{Duty: pos.Duty, AmbientC: airC, AltitudeM: site.ElevationM, CarrierKHz: pos.CarrierKHz,
			SupplyPhases: pos.SupplyPhases, SinglePhaseFactor: singlePhaseFactorOf(pos.Position, m)},
		DesignAmbientMaxC: design, Samples: window(Samples(s.PositionReadings(tg)), s.Now, win),
		Events: s.PositionEvents(tg), At: s.Now.Unix(),
	}, health.DefaultDutyParams())
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// TestPlantedDerating checks the single-phase drive and the raised carrier
// with health.AllowedCurrent and health.AssessDuty.
func TestPlantedDerating(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	month := 30 * 24 * time.Hour

	// Lift station 5 hangs on a single-phase spur: pump A has no derate set
	// (planted), pump B has it. Both carry their load well inside the
	// single-phase current.
	a := duty(t, s, tag(tagLift, tagKindPump, 9), month, 30)
	b := duty(t, s, tag(tagLift, tagKindPump, 10), month, 30)
	if !slices.Contains(rules(a.Findings), "derating.single_phase_supply") {
		t.Errorf("LFT-P09 raises %v, want derating.single_phase_supply", rules(a.Findings))
	}
	if len(b.Findings) != 0 {
		t.Errorf("LFT-P10, derate set, raises %v, want nothing", rules(b.Findings))
	}
	for _, d := range []health.DutyAssessment{a, b} {
		if f, _ := d.Allowance.Factor(health.FactorSupply); f.Value != 0.5 || d.Utilisation.Fraction >= 0.9 {
			t.Errorf("single-phase factor %v, utilisation %.2f: want 0.5 and under 0.9", f.Value, d.Utilisation.Fraction)
		}
	}

	// The air scour blower's carrier is raised to 10 kHz: the default
	// table (0.80 at 8 kHz, 0.65 at 12 kHz) gives 0.725 by linear
	// interpolation, and the blower's steady current then exceeds its
	// derated current while at the default carrier it would not.
	tb := tag(tagFilters, tagKindBlow, 3)
	c := duty(t, s, tb, month, 30)
	car, _ := c.Allowance.Factor(health.FactorCarrier)
	if math.Abs(car.Value-0.725) > 1e-12 {
		t.Errorf("carrier factor at 10 kHz = %v, want 0.725", car.Value)
	}
	if c.Utilisation.Fraction <= 1 || c.Utilisation.Fraction*car.Value >= 0.9 {
		t.Errorf("utilisation %.3f at 10 kHz, %.3f at the default carrier: want above 1 and under 0.9",
			c.Utilisation.Fraction, c.Utilisation.Fraction*car.Value)
	}
	if got := rules(c.Findings); !slices.Equal(got, []string{"derating.carrier"}) {
		t.Errorf("FLT-B03 raises %v, want only derating.carrier", got)
	}
}

// TestPlantedDCBus checks the blower whose ripple climbs and the
// centrifuge that trips on over-voltage while decelerating, with
// health.RippleTrendOf and health.AssessDCBus.
func TestPlantedDCBus(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	p := health.DefaultDCBusParams()
	now := s.Now.Unix()
	for _, pp := range s.plans {
		if !pp.model.logsRipple {
			continue
		}
		tr := health.RippleTrendOf(Samples(s.PositionReadings(pp.row.Tag)), pp.model.row.NormalDutyCurrentA, now-p.RippleWindowS, now, p)
		switch {
		case pp.plantRipple && (!tr.Fitted || tr.RiseFraction <= 2*p.RippleRiseFraction):
			t.Errorf("%s: ripple trend %+v, want fitted and rising by more than %.0f %%", pp.row.Tag, tr, 200*p.RippleRiseFraction)
		case !pp.plantRipple && tr.Fitted && tr.RiseFraction > p.RippleRiseFraction/2:
			t.Errorf("%s: ripple rises %.0f %% at the same load, want a steady ripple", pp.row.Tag, 100*tr.RiseFraction)
		}
	}

	tc := tag(tagDewater, tagKindCent, 2)
	rs := s.PositionReadings(tc)
	at := map[int64]Reading{}
	for _, r := range rs {
		at[r.At.Unix()] = r
	}
	recent := 0
	for _, e := range s.PositionEvents(tc) {
		if e.Type != health.EventTrip || e.Cause != health.TripOverVoltage {
			continue
		}
		if e.State != health.StateDecelerating {
			t.Errorf("over-voltage trip at %v not while decelerating", time.Unix(e.At, 0).UTC())
		}
		if e.At <= now-p.TripWindowS {
			continue
		}
		recent++
		// The reading of the hour the trip fell in shows the bowl slowing
		// down and the bus lifted by the returned energy.
		end := time.Unix(e.At, 0).UTC().Truncate(time.Hour).Add(time.Hour)
		r, ok1 := at[end.Unix()]
		prev, ok2 := at[end.Add(-time.Hour).Unix()]
		if !ok1 || !ok2 || r.FrequencyHz >= prev.FrequencyHz || r.BusV < math.Sqrt2*400+60 {
			t.Errorf("trip at %v: readings %+v after %+v, want falling frequency and a lifted bus", end, r, prev)
		}
	}
	if recent < 3 {
		t.Errorf("%d over-voltage trips in the last 90 days, want at least 3", recent)
	}
	for _, n := range []int{1, 2, 3} {
		tg := tag(tagDewater, tagKindCent, n)
		pos, _ := s.Position(tg)
		d, _ := s.InstalledDrive(tg)
		m, _ := s.Model(d.Model)
		bus, err := health.AssessDCBus(health.DCBusInput{Ratings: ratingsOf(m), Duty: pos.Duty, SupplyLineV: pos.SupplyVoltageV,
			Samples: Samples(s.PositionReadings(tg)), Events: s.PositionEvents(tg), At: now}, p)
		if err != nil {
			t.Fatal(err)
		}
		want := []string(nil)
		if n == 2 {
			want = []string{"dc_bus.overvoltage_on_deceleration"}
		}
		if got := rules(bus.Findings); !slices.Equal(got, want) {
			t.Errorf("%s: AssessDCBus raises %v, want %v", tg, got, want)
		}
	}
}

// trailingLife returns, for the unit standing at the position at Now, the
// bank's and fan's life used at Now and their damage rates per hour over
// the trailing year (or the unit's time there when shorter), by the
// 10-degree rule and the fan's halving rule on the generated hours.
func trailingLife(s *Scenario, tg string) (capD, fanD, capRate, fanRate float64) {
	d, _ := s.InstalledDrive(tg)
	var dc, df, n float64
	for lh := range s.lifeHours(s.plans[s.byTag[tg]]) {
		if lh.serial != d.Serial {
			dc, df, n = 0, 0, 0
			continue
		}
		capD, fanD = lh.capD, lh.fanD
		dc += lh.dCap
		df += lh.dFan
		n++
	}
	return capD, fanD, dc / n, df / n
}

// TestPlantedKioskCapacitors checks the booster kiosk whose capacitors
// reach end of life within a year, by the 10-degree rule on the generated
// readings (see plantKioskInstall for the arithmetic): life used between
// 0.85 and 0.95, and at the trailing year's damage rate the rest lasts
// less than 365 days (more than 90, so the finding is minor, not major).
func TestPlantedKioskCapacitors(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	tg := tag(tagBoosters, tagKindPump, 3)
	capD, _, rate, _ := trailingLife(s, tg)
	days := (1 - capD) / rate / 24
	if capD < 0.85 || capD > 0.95 || days <= 90 || days >= 365 {
		t.Errorf("%s: life used %.3f, end of life in %.0f days: want 0.85-0.95 and 90-365 days", tg, capD, days)
	}
	d, _ := s.InstalledDrive(tg)
	for _, c := range s.Components {
		if c.Serial == d.Serial && c.Kind == "dc_bus_capacitors" {
			t.Errorf("the kiosk's bank was replaced at %v; the planted case needs the original bank", c.InstalledAt)
		}
	}
	rs := s.PositionReadings(tg)
	last := rs[len(rs)-1]
	if math.Abs(last.DriveCapacitorLifeUsedFraction-capD) > 1e-4 {
		t.Errorf("the drive reports life used %v at Now, the arithmetic says %v", last.DriveCapacitorLifeUsedFraction, capD)
	}
	// The hand calculation in plantKioskInstall assumes a mean core of
	// about 64 °C; the generated year must agree within a few kelvin.
	m, _ := s.Model(d.Model)
	core := 0.0
	for _, r := range rs {
		core += capacitorCoreC(m.Capacitor, r.InternalAirC, r.CurrentA/m.NormalDutyCurrentA)
	}
	if core /= float64(len(rs)); math.Abs(core-64) > 3 {
		t.Errorf("mean capacitor core %.1f °C, the hand calculation assumes about 64 °C", core)
	}
	if L := capacitorLifeH(m.Capacitor, 64); math.Abs(L-5000*math.Pow(2, 4.6)) > 1e-6 {
		t.Errorf("L at 64 °C = %v h, want 5000 × 2^4.6", L)
	}
}

// TestNoUnplannedWearOut checks that no other unit in service is near the
// end of its calculated capacitor or fan life: at the trailing year's rate
// each has at least a year and a half left, so only the planted kiosk
// raises a capacitor finding and no unit a fan finding.
func TestNoUnplannedWearOut(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	for _, p := range s.plans {
		if p.plantHotKiosk {
			continue
		}
		capD, fanD, cr, fr := trailingLife(s, p.row.Tag)
		if days := (1 - capD) / cr / 24; days < 548 {
			t.Errorf("%s: capacitor life used %.2f, end of life in %.0f days", p.row.Tag, capD, days)
		}
		if days := (1 - fanD) / fr / 24; days < 548 {
			t.Errorf("%s: fan life used %.2f, end of life in %.0f days", p.row.Tag, fanD, days)
		}
	}
}

// TestPlantedStorage checks the spare left unpowered for more than two
// years, and that every other unit in the stores was energised within the
// last 335 days (no energising advice due; common practice is yearly).
func TestPlantedStorage(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	shelved := 0
	for _, d := range s.Drives {
		if d.Status != health.StatusInStores {
			continue
		}
		days := s.Now.Sub(*d.LastEnergisedAt).Hours() / 24
		planted := slices.Contains(s.Planted, plantedStorage(d.Serial))
		switch {
		case planted:
			shelved++
			if days <= 730 {
				t.Errorf("shelved spare %s unpowered %.0f days, want more than 730", d.Serial, days)
			}
			for _, in := range s.Installations {
				if in.Serial == d.Serial {
					t.Errorf("shelved spare %s was installed at %s", d.Serial, in.Position)
				}
			}
		case days > 335:
			t.Errorf("spare %s unpowered %.0f days: an unplanned storage finding", d.Serial, days)
		}
		// The importer replays installations after creating drives, which
		// sets last_energised_at to the last removal: hold that date too.
		for _, in := range s.Installations {
			if in.Serial == d.Serial && in.RemovedAt != nil && s.Now.Sub(*in.RemovedAt) > 335*24*time.Hour && !planted {
				last := true
				for _, o := range s.Installations {
					if o.Serial == d.Serial && o.InstalledAt.After(in.InstalledAt) {
						last = false
					}
				}
				if last {
					t.Errorf("spare %s last removed %v, more than 335 days before Now", d.Serial, in.RemovedAt)
				}
			}
		}
	}
	if shelved != 1 {
		t.Errorf("%d shelved spares, want 1", shelved)
	}
}

// TestPlantedSilent checks the silent position with
// health.AssessDataQuality: its readings stop more than seven days before
// Now (a major finding), and no other position raises a data-quality
// finding.
func TestPlantedSilent(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	for _, p := range s.plans {
		fs, err := s.PositionFindings(p.row.Tag)
		if err != nil {
			t.Fatal(err)
		}
		var dq []ruleSeverity
		for _, f := range fs {
			if f.Kind == health.KindDataQuality {
				dq = append(dq, ruleSeverity{f.Rule, f.Severity})
			}
		}
		var want []ruleSeverity
		if p.plantSilent {
			want = []ruleSeverity{{"data_quality.silent", health.SeverityMajor}}
		}
		if !slices.Equal(dq, want) {
			t.Errorf("%s: data-quality findings %v, want %v", p.row.Tag, dq, want)
		}
	}
}

// TestPlantedProblemsHoldForAnySeedAndNow checks that the scenario's
// findings come from its layout, not from luck: for other seeds and
// reference times (serve --demo uses the present), the health models raise
// the same rules on the same positions as for the checked-in files, the
// planted capacitor, storage and wear-out cases hold, and the same
// positions are clean.
func TestPlantedProblemsHoldForAnySeedAndNow(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("generates three more scenarios")
	}
	base := expected(t)
	strip := func(ex Expected) []ExpectedFinding {
		var out []ExpectedFinding
		for _, f := range ex.Findings {
			if strings.HasPrefix(f.Subject, "drive:") {
				f.Subject = "drive:"
			}
			out = append(out, f)
		}
		return out
	}
	for _, c := range []struct {
		seed uint64
		now  time.Time
	}{
		{2, time.Date(2027, 6, 14, 9, 0, 0, 0, time.UTC)},
		{3, time.Date(2026, 2, 28, 23, 0, 0, 0, time.UTC)},
		{42, time.Date(2029, 9, 1, 5, 0, 0, 0, time.UTC)},
	} {
		s := Generate(c.seed, c.now)
		ex, err := s.ExpectedFindings()
		if err != nil {
			t.Fatal(err)
		}
		if got, want := strip(ex), strip(base); !slices.Equal(got, want) {
			t.Errorf("seed %d, now %v: findings differ from the checked-in scenario's:\n got %v\nwant %v", c.seed, c.now, got, want)
		}
		if !slices.Equal(ex.Clean, base.Clean) {
			t.Errorf("seed %d, now %v: clean %v, want %v", c.seed, c.now, ex.Clean, base.Clean)
		}
		tg := tag(tagBoosters, tagKindPump, 3)
		capD, _, rate, _ := trailingLife(s, tg)
		if days := (1 - capD) / rate / 24; capD < 0.85 || capD > 0.95 || days <= 90 || days >= 365 {
			t.Errorf("seed %d, now %v: kiosk life used %.3f, end of life in %.0f days", c.seed, c.now, capD, days)
		}
		for _, p := range s.plans {
			if p.plantHotKiosk {
				continue
			}
			capD, fanD, cr, fr := trailingLife(s, p.row.Tag)
			if (1-capD)/cr/24 < 548 || (1-fanD)/fr/24 < 548 {
				t.Errorf("seed %d, now %v: %s near the end of its calculated life (capacitor %.2f, fan %.2f)", c.seed, c.now, p.row.Tag, capD, fanD)
			}
		}
		for _, d := range s.Drives {
			if d.Status != health.StatusInStores {
				continue
			}
			days := s.Now.Sub(*d.LastEnergisedAt).Hours() / 24
			if planted := slices.Contains(s.Planted, plantedStorage(d.Serial)); planted != (days > 730) || (!planted && days > 335) {
				t.Errorf("seed %d, now %v: spare %s unpowered %.0f days (planted %v)", c.seed, c.now, d.Serial, days, planted)
			}
		}
		if !mainGroupsHaveFailures(s) {
			t.Errorf("seed %d, now %v: a main model group has fewer than three capacitor or fan failures", c.seed, c.now)
		}
	}
}
