package demo

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"kelvard/health"
)

// This file lists the findings the assessment should raise on the demo
// fleet, by running the health models on the generated register and
// readings the way the assessment is expected to.

// ExpectedFinding is one (subject, rule) pair: Subject is a position tag,
// or "drive:" and a serial for a drive that stands at no position.
type ExpectedFinding struct {
	Subject string
	Rule    string
}

// Expected is what the assessment should find on the fleet at Now.
type Expected struct {
	// Findings are sorted by subject, then rule.
	Findings []ExpectedFinding
	// Clean lists the positions with no finding at all, sorted.
	Clean []string
}

// dutyWindow is the window of readings the duty and data-quality rules
// judge, ending at Now.
const dutyWindow = 30 * 24 * time.Hour

// PositionFindings returns the findings the health models raise for the
// position at Now, as the assessment is expected to compute them:
//
//   - enclosure.* and environment.board_corrosion: health.JudgeEnclosure on
//     the area's environment and the drive's own enclosure (or the
//     position's cabinet), boards as the drive model says; verify and
//     outside-judgement items count, as they are findings of advice
//     severity;
//   - environment.cabinet_*: health.AssessCabinet at the area's design
//     maximum ambient and the drive's rated current, the area's sun on the
//     cabinet;
//   - derating.* and environment.ambient_above_rating,
//     environment.altitude_insulation: health.AssessDuty over the last 30
//     days, with the air at the drive taken as the area's design maximum
//     (own enclosure) or the cabinet air AssessCabinet predicts (cabinet),
//     the site's elevation, the position's carrier and supply, and the
//     model's single-phase factor where the position says it is set;
//   - dc_bus.*: health.AssessDCBus over the whole reading year with the
//     position's supply voltage and events (the rules apply their own
//     windows);
//   - data_quality.*: health.AssessDataQuality over the last 30 days.
//
// Capacitor, fan and storage rules need models not in this package; they
// are listed from the planted problems (see ExpectedFindings).
func (s *Scenario) PositionFindings(tag string) ([]health.Finding, error) {
	pos, ok := s.Position(tag)
	if !ok {
		return nil, fmt.Errorf("expected findings: no position %q", tag)
	}
	drive, ok := s.InstalledDrive(tag)
	if !ok {
		return nil, fmt.Errorf("expected findings: no drive stands at %s", tag)
	}
	model, _ := s.Model(drive.Model)
	area, _ := s.AreaOf(pos)
	site, _ := s.SiteOf(pos.Site)
	env := area.Environment.Health()
	ratings := ratingsOf(model)
	now := s.Now.Unix()

	var out []health.Finding
	housing, err := housingOf(pos.Position, model)
	if err != nil {
		return nil, fmt.Errorf("expected findings %s: %w", tag, err)
	}
	out = append(out, health.JudgeEnclosure(env, housing).Findings...)

	all := Samples(s.PositionReadings(tag))
	var recent []health.Sample
	for _, sm := range all {
		if sm.At > now-int64(dutyWindow/time.Second) {
			recent = append(recent, sm)
		}
	}
	events := s.PositionEvents(tag)

	air, design := env.AmbientMaxC, env.AmbientMaxC
	if pos.Mounting == health.MountingCabinet {
		cab, err := health.AssessCabinet(health.CabinetInput{
			Cabinet: cabinetOf(pos.Cabinet, env.Sun), Ratings: ratings, Duty: pos.Duty,
			DesignAmbientMaxC: env.AmbientMaxC, DesignCurrentA: math.NaN(),
		}, health.DefaultCabinetParams())
		if err != nil {
			return nil, fmt.Errorf("expected findings %s: %w", tag, err)
		}
		out = append(out, cab.Findings...)
		air, design = cab.Heat.InternalAirC, math.NaN()
	}
	duty, err := health.AssessDuty(health.DutyInput{
		Ratings: ratings,
		Application: health.Application{Duty: pos.Duty, AmbientC: air, AltitudeM: site.ElevationM, CarrierKHz: pos.CarrierKHz,
			SupplyPhases: pos.SupplyPhases, SinglePhaseFactor: singlePhaseFactorOf(pos.Position, model)},
		DesignAmbientMaxC: design, Samples: recent, Events: events, At: now,
	}, health.DefaultDutyParams())
	if err != nil {
		return nil, fmt.Errorf("expected findings %s: %w", tag, err)
	}
	out = append(out, duty.Findings...)

	bus, err := health.AssessDCBus(health.DCBusInput{Ratings: ratings, Duty: pos.Duty, SupplyLineV: pos.SupplyVoltageV,
		Samples: all, Events: events, At: now}, health.DefaultDCBusParams())
	if err != nil {
		return nil, fmt.Errorf("expected findings %s: %w", tag, err)
	}
	out = append(out, bus.Findings...)

	var last int64
	if len(all) > 0 {
		last = all[len(all)-1].At
	}
	dq, err := health.AssessDataQuality(health.DataQualityInput{Samples: recent, LastReadingAt: last, At: now,
		DesignAmbientMinC: env.AmbientMinC, DesignAmbientMaxC: env.AmbientMaxC}, health.DefaultDataQualityParams())
	if err != nil {
		return nil, fmt.Errorf("expected findings %s: %w", tag, err)
	}
	return append(out, dq...), nil
}

// ExpectedFindings returns every (subject, rule) pair the assessment should
// raise at Now: PositionFindings for every position, plus the planted
// capacitor, fan and storage problems (rules whose models are not in
// package health yet), and the positions with no finding.
func (s *Scenario) ExpectedFindings() (Expected, error) {
	seen := map[ExpectedFinding]bool{}
	var ex Expected
	add := func(f ExpectedFinding) {
		if !seen[f] {
			seen[f] = true
			ex.Findings = append(ex.Findings, f)
		}
	}
	for _, p := range s.Positions {
		fs, err := s.PositionFindings(p.Tag)
		if err != nil {
			return Expected{}, err
		}
		for _, f := range fs {
			add(ExpectedFinding{p.Tag, f.Rule})
		}
	}
	for _, pl := range s.Planted {
		if kind, _, _ := strings.Cut(pl.Rule, "."); kind == string(health.KindCapacitor) ||
			kind == string(health.KindFan) || kind == string(health.KindStorage) {
			add(ExpectedFinding{pl.Subject, pl.Rule})
		}
	}
	slices.SortFunc(ex.Findings, func(a, b ExpectedFinding) int {
		if c := strings.Compare(a.Subject, b.Subject); c != 0 {
			return c
		}
		return strings.Compare(a.Rule, b.Rule)
	})
	for _, p := range s.Positions {
		if !slices.ContainsFunc(ex.Findings, func(f ExpectedFinding) bool { return f.Subject == p.Tag }) {
			ex.Clean = append(ex.Clean, p.Tag)
		}
	}
	slices.Sort(ex.Clean)
	return ex, nil
}

// Golden writes the expected findings as the golden file
// testdata/demo/expected_findings.golden holds them: a header saying how
// they were produced, a [findings] section with one "subject rule" pair a
// line, sorted, and a [clean] section with one position tag a line.
func (ex Expected) Golden(seed uint64, now time.Time) string {
	var b strings.Builder
	fmt.Fprintf(&b, `# kelvard demo fleet: the findings the assessment should raise.
# Scenario: store/demo.Generate(seed %d, now %s).
# Produced by store/demo.(*Scenario).ExpectedFindings; regenerate with
#   go test ./store/demo -run TestGoldenFiles -updateDemo
# How each rule family was listed:
#   enclosure.*, environment.board_corrosion: health.JudgeEnclosure (verify
#     items count: they are advice-severity findings);
#   environment.cabinet_*: health.AssessCabinet at the design maximum and
#     rated current;
#   derating.*, environment.ambient_above_rating: health.AssessDuty over the
#     last 30 days, air at the drive = area design maximum (own enclosure)
#     or the cabinet air AssessCabinet predicts (cabinet);
#   dc_bus.*: health.AssessDCBus over the reading year;
#   data_quality.*: health.AssessDataQuality over the last 30 days;
#   capacitor.*, fan.*, storage.*: the planted problems only (their models
#     are not in package health yet).
# The assessment (package jobs) will be held to this file; where the two
# differ they are to be reconciled, not silently edited.
# A subject is a position tag, or drive:<serial> for a unit in the stores.
[findings]
`, seed, now.UTC().Format(time.RFC3339))
	for _, f := range ex.Findings {
		fmt.Fprintf(&b, "%s %s\n", f.Subject, f.Rule)
	}
	b.WriteString("[clean]\n")
	for _, c := range ex.Clean {
		b.WriteString(c + "\n")
	}
	return b.String()
}
