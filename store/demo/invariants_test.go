package demo

import (
	"math"
	"testing"
	"time"

	"kelvard/health"
)

func TestCountsAreInRange(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	cases := []struct {
		what   string
		n      int
		lo, hi int
	}{
		{"sites", len(s.Sites), 5, 5},
		{"areas", len(s.Areas), 11, 11},
		{"drive models", len(s.Models), 8, 8},
		{"positions", len(s.Positions), 75, 85},
		{"drives", len(s.Drives), 85, 110},
		{"installations", len(s.Installations), 100, 250},
		{"component replacements", len(s.Components), 30, 200},
		{"events", len(s.Events), 400, 2000},
	}
	for _, c := range cases {
		if c.n < c.lo || c.n > c.hi {
			t.Errorf("%s: %d, want %d to %d", c.what, c.n, c.lo, c.hi)
		}
	}
	n := map[health.EventType]int{}
	for _, e := range s.Events {
		n[e.Type]++
	}
	if n[health.EventFailure] < 30 || n[health.EventFailure] > 150 {
		t.Errorf("%d failures in eight years, want 30 to 150", n[health.EventFailure])
	}
	if n[health.EventComponentReplaced] < 20 || n[health.EventTrip] < 300 {
		t.Errorf("events by type %v: want at least 20 component replacements and 300 trips", n)
	}
	status := map[health.DriveStatus]int{}
	for _, d := range s.Drives {
		status[d.Status]++
	}
	if status[""] != len(s.Positions) {
		t.Errorf("%d drives installed, want one per position (%d)", status[""], len(s.Positions))
	}
	if status[health.StatusInStores] < 3 {
		t.Errorf("%d drives in stores, want at least 3", status[health.StatusInStores])
	}
}

func TestEveryPlantedSubjectExists(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	if len(s.Planted) != 11 {
		t.Errorf("%d planted problems, want 11 (DESIGN.md section 6)", len(s.Planted))
	}
	for _, pl := range s.Planted {
		if serial, ok := cutPrefix(pl.Subject, "drive:"); ok {
			if _, ok := s.drivesBy[serial]; !ok {
				t.Errorf("planted %s: no drive %s", pl.Rule, serial)
			}
			continue
		}
		if _, ok := s.Position(pl.Subject); !ok {
			t.Errorf("planted %s: no position %s", pl.Rule, pl.Subject)
		}
	}
}

func cutPrefix(s, p string) (string, bool) {
	if len(s) >= len(p) && s[:len(p)] == p {
		return s[len(p):], true
	}
	return s, false
}

// TestReferencesResolve checks that every natural key names a row written
// before it in import order, and that events name the drive that stood at
// their position then.
func TestReferencesResolve(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	sites := map[string]bool{}
	for _, st := range s.Sites {
		sites[st.Name] = true
	}
	areas := map[[2]string]bool{}
	for _, a := range s.Areas {
		if !sites[a.Site] {
			t.Errorf("area %s: no site %q", a.Name, a.Site)
		}
		areas[[2]string{a.Site, a.Name}] = true
	}
	models := map[string]bool{}
	for _, m := range s.Models {
		models[m.Name] = true
	}
	tags := map[string]string{}
	for _, p := range s.Positions {
		if !areas[[2]string{p.Site, p.Area}] {
			t.Errorf("position %s: no area %q at %q", p.Tag, p.Area, p.Site)
		}
		if _, dup := tags[p.Tag]; dup {
			t.Errorf("position tag %s used twice", p.Tag)
		}
		tags[p.Tag] = p.Site
	}
	made := map[string]time.Time{}
	for _, d := range s.Drives {
		if !models[d.Model] || !sites[d.Site] {
			t.Errorf("drive %s: model %q or site %q unknown", d.Serial, d.Model, d.Site)
		}
		if d.StoresArea != "" && !areas[[2]string{d.Site, d.StoresArea}] {
			t.Errorf("drive %s: no stores area %q at %q", d.Serial, d.StoresArea, d.Site)
		}
		if _, dup := made[d.Serial]; dup {
			t.Errorf("serial %s used twice", d.Serial)
		}
		made[d.Serial] = d.ManufacturedAt
	}
	for _, in := range s.Installations {
		m, ok := made[in.Serial]
		if !ok || tags[in.Position] != in.Site {
			t.Errorf("installation %+v: unknown drive or position", in)
		}
		if in.InstalledAt.Before(m) {
			t.Errorf("drive %s installed %v before it was made %v", in.Serial, in.InstalledAt, m)
		}
	}
	for _, c := range s.Components {
		if m, ok := made[c.Serial]; !ok || c.InstalledAt.Before(m) || c.InstalledAt.After(s.Now) {
			t.Errorf("component %s %s at %v: unknown drive or out of its life", c.Serial, c.Kind, c.InstalledAt)
		}
		if c.RemovedAt != nil && c.RemovedAt.Before(c.InstalledAt) {
			t.Errorf("component %s %s removed before it was fitted", c.Serial, c.Kind)
		}
	}
	for _, e := range s.Events {
		if _, ok := made[e.Serial]; !ok {
			t.Errorf("event %s %v: unknown drive", e.Type, e.At)
		}
		if e.At.Before(s.HistoryStart) || e.At.After(s.Now) {
			t.Errorf("event %s %s at %v outside the history", e.Serial, e.Type, e.At)
		}
		if e.Position != "" && !standsAt(s, e.Serial, e.Position, e.At) {
			t.Errorf("event %s %s at %v: the drive did not stand at %s then", e.Serial, e.Type, e.At, e.Position)
		}
		if err := validEvent(e); err != "" {
			t.Errorf("event %s %s at %v: %s", e.Serial, e.Type, e.At, err)
		}
	}
}

func standsAt(s *Scenario, serial, tag string, at time.Time) bool {
	for _, in := range s.Installations {
		if in.Serial == serial && in.Position == tag && !at.Before(in.InstalledAt) && (in.RemovedAt == nil || !at.After(*in.RemovedAt)) {
			return true
		}
	}
	return false
}

// validEvent applies the register's rules for events (store.Event
// validation) without a database.
func validEvent(e Event) string {
	switch {
	case !e.Type.Valid():
		return "unknown type"
	case e.Type == health.EventTrip && !e.TripCause.Valid():
		return "trip without a valid cause"
	case e.Type != health.EventTrip && e.TripCause != "":
		return "trip cause on a non-trip"
	case !e.State.Valid():
		return "unknown state"
	case e.Type == health.EventFailure && (!e.FailureMode.Valid() || !e.FailureCause.Valid()):
		return "failure without a valid mode and cause"
	case e.Type != health.EventFailure && (e.FailureMode != "" || e.FailureCause != ""):
		return "failure mode on a non-failure"
	case e.Type == health.EventComponentReplaced && !e.Component.Valid():
		return "component replacement without a component"
	case e.Type != health.EventComponentReplaced && e.Component != "":
		return "component on another event"
	}
	return ""
}

// TestInstallationHistoryIsConsistent checks that stays never overlap,
// every position has exactly one drive at Now, and drive statuses follow
// from the history.
func TestInstallationHistoryIsConsistent(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	byPos := map[string][]Installation{}
	byDrive := map[string][]Installation{}
	for _, in := range s.Installations {
		if (in.RemovedAt == nil) != (in.StatusAfter == "") {
			t.Errorf("%s at %s: removed_at and status_after must come together", in.Serial, in.Position)
		}
		if in.RemovedAt != nil && in.RemovedAt.Before(in.InstalledAt) {
			t.Errorf("%s at %s removed before installed", in.Serial, in.Position)
		}
		byPos[in.Position] = append(byPos[in.Position], in)
		byDrive[in.Serial] = append(byDrive[in.Serial], in)
	}
	noOverlap := func(what string, ins []Installation) {
		for i := 1; i < len(ins); i++ {
			prev := ins[i-1]
			if prev.RemovedAt == nil || ins[i].InstalledAt.Before(*prev.RemovedAt) {
				t.Errorf("%s: stays overlap: %+v and %+v", what, prev, ins[i])
			}
		}
	}
	for _, p := range s.Positions {
		ins := byPos[p.Tag]
		noOverlap(p.Tag, ins)
		if len(ins) == 0 || ins[len(ins)-1].RemovedAt != nil {
			t.Errorf("position %s has no drive at Now", p.Tag)
		}
	}
	for _, d := range s.Drives {
		ins := byDrive[d.Serial]
		noOverlap(d.Serial, ins)
		if len(ins) == 0 {
			if d.Status != health.StatusInStores || d.LastEnergisedAt == nil {
				t.Errorf("never-installed drive %s: status %q, last energised %v", d.Serial, d.Status, d.LastEnergisedAt)
			}
			continue
		}
		last := ins[len(ins)-1]
		switch {
		case last.RemovedAt == nil && d.Status != "":
			t.Errorf("installed drive %s written with status %q, want empty", d.Serial, d.Status)
		case last.RemovedAt != nil && d.Status != last.StatusAfter:
			t.Errorf("drive %s: status %q but its last removal says %q", d.Serial, d.Status, last.StatusAfter)
		case last.RemovedAt != nil && (d.LastEnergisedAt == nil || d.LastEnergisedAt.Before(*last.RemovedAt)):
			// A repaired unit is energised on the bench after its removal.
			t.Errorf("drive %s: last energised %v, before its last removal %v", d.Serial, d.LastEnergisedAt, last.RemovedAt)
		}
		if d.Status == health.StatusInStores && d.StoresArea == "" {
			t.Errorf("drive %s in stores names no stores area", d.Serial)
		}
	}
}

// TestReadingsAreHourly checks that every position reports every hour of
// the reading year while a working drive stands there, except the silent
// position, whose readings stop several days before Now.
func TestReadingsAreHourly(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	total, missing := 0, 0
	for _, p := range s.plans {
		rs := s.PositionReadings(p.row.Tag)
		got := map[int64]bool{}
		var last time.Time
		for i, r := range rs {
			if i > 0 && !r.At.After(rs[i-1].At) {
				t.Fatalf("%s: readings out of order at %v", p.row.Tag, r.At)
			}
			if r.At.Sub(r.At.Truncate(time.Hour)) != 0 {
				t.Fatalf("%s: reading at %v is not on the hour", p.row.Tag, r.At)
			}
			got[r.At.Unix()] = true
			last = r.At
		}
		wantLast := s.Now
		if p.plantSilent {
			wantLast = s.Now.Add(-silentHours * time.Hour)
			if s.Now.Sub(wantLast) < 3*24*time.Hour {
				t.Errorf("silent position stops only %v before Now", s.Now.Sub(wantLast))
			}
		}
		if !last.Equal(wantLast) {
			t.Errorf("%s: last reading %v, want %v", p.row.Tag, last, wantLast)
		}
		for h := 1; h <= hoursPerYear; h++ {
			at := s.ReadingsStart.Add(time.Duration(h) * time.Hour)
			if at.After(wantLast) {
				break
			}
			total++
			if got[at.Unix()] {
				continue
			}
			missing++
			if why := explainGap(s, p.row.Tag, at); why == "" {
				t.Errorf("%s: no reading at %v and no swap or failure explains it", p.row.Tag, at)
			}
		}
	}
	if float64(missing) > 0.005*float64(total) {
		t.Errorf("%d of %d position-hours missing, want under 0.5 %%", missing, total)
	}
}

// explainGap says why a position has no reading for the hour ending at:
// no drive stood there for the whole hour, or the drive standing there had
// failed.
func explainGap(s *Scenario, tag string, at time.Time) string {
	from := at.Add(-time.Hour)
	for _, in := range s.Installations {
		if in.Position != tag || in.InstalledAt.After(from) || (in.RemovedAt != nil && in.RemovedAt.Before(at)) {
			continue
		}
		for _, e := range s.Events {
			if e.Serial == in.Serial && e.Type == health.EventFailure && e.Position == tag && e.At.Before(at) && !e.At.Before(in.InstalledAt) {
				return "failed drive awaiting its swap"
			}
		}
		return ""
	}
	return "no drive for the whole hour"
}

// TestReadingValues checks every value: logged where the drive logs it,
// finite, within physical ranges, and consistent (current and frequency
// zero together; heatsink above ambient while running; bus near √2 × line
// when stopped).
func TestReadingValues(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	for _, p := range s.plans {
		m := p.model
		nd := m.row.NormalDutyCurrentA
		var prevRun, prevOn float64
		var prevAt time.Time
		for _, r := range s.PositionReadings(p.row.Tag) {
			tag := p.row.Tag
			for name, v := range map[string]float64{"ambient": r.AmbientC, "heatsink": r.HeatsinkC, "current": r.CurrentA,
				"frequency": r.FrequencyHz, "bus": r.BusV, "run hours": r.RunHoursH, "power-on hours": r.PowerOnHoursH} {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					t.Fatalf("%s %v: %s is %v", tag, r.At, name, v)
				}
			}
			logged := map[string][2]bool{
				"internal air": {!math.IsNaN(r.InternalAirC), m.logsInternal || p.cabinet != cabinetNone},
				"peak current": {!math.IsNaN(r.PeakCurrentA), m.logsPeak},
				"ripple":       {!math.IsNaN(r.BusRippleV), m.logsRipple},
				"life used":    {!math.IsNaN(r.DriveCapacitorLifeUsedFraction) && !math.IsNaN(r.DriveFanLifeUsedFraction), m.logsLife},
				"capacitance":  {!math.IsNaN(r.CapacitanceUF), m.logsBank && r.At.Add(localOffset).Hour() == 0},
				"esr":          {!math.IsNaN(r.ESRMilliohm), m.logsBank && r.At.Add(localOffset).Hour() == 0},
			}
			for name, lw := range logged {
				if lw[0] != lw[1] {
					t.Fatalf("%s %v: %s logged %v, want %v", tag, r.At, name, lw[0], lw[1])
				}
			}
			running := r.FrequencyHz > 0
			switch {
			case r.AmbientC < -10 || r.AmbientC > 60:
				t.Fatalf("%s %v: ambient %v °C", tag, r.At, r.AmbientC)
			case r.InternalAirC > 85 || r.HeatsinkC > 110:
				t.Fatalf("%s %v: internal %v °C, heatsink %v °C", tag, r.At, r.InternalAirC, r.HeatsinkC)
			case running != (r.CurrentA > 0):
				t.Fatalf("%s %v: frequency %v Hz with current %v A", tag, r.At, r.FrequencyHz, r.CurrentA)
			case r.CurrentA > 1.05*nd || r.FrequencyHz > 51:
				t.Fatalf("%s %v: current %v A (rated %v), frequency %v Hz", tag, r.At, r.CurrentA, nd, r.FrequencyHz)
			case running && r.HeatsinkC < r.AmbientC:
				t.Fatalf("%s %v: heatsink %v below ambient %v while running", tag, r.At, r.HeatsinkC, r.AmbientC)
			case !running && math.Abs(r.BusV/(math.Sqrt2*p.row.SupplyVoltageV)-1) > 0.06:
				// The supply wanders a few per cent by day and night.
				t.Fatalf("%s %v: stopped, bus %v V far from √2 × %v V", tag, r.At, r.BusV, p.row.SupplyVoltageV)
			case r.BusV < 0.85*math.Sqrt2*p.row.SupplyVoltageV || r.BusV > 0.95*m.row.BusTripV:
				if !(p.plantRegen && r.BusV <= m.row.BusTripV) {
					t.Fatalf("%s %v: bus %v V", tag, r.At, r.BusV)
				}
			}
			if r.At.Sub(prevAt) == time.Hour && (r.RunHoursH < prevRun || r.PowerOnHoursH < prevOn) && !swappedBetween(s, tag, prevAt, r.At) {
				t.Fatalf("%s %v: counters went backwards", tag, r.At)
			}
			prevRun, prevOn, prevAt = r.RunHoursH, r.PowerOnHoursH, r.At
		}
	}
}

func swappedBetween(s *Scenario, tag string, a, b time.Time) bool {
	for _, in := range s.Installations {
		if in.Position == tag && in.InstalledAt.After(a.Add(-time.Hour)) && !in.InstalledAt.After(b) {
			return true
		}
	}
	return false
}

// TestReadingsFollowTheWeather checks the seasonal and daily cycles and
// that current follows load: the intake's outdoor air is warmer in July
// than in January and at 15:00 than at 05:00 local time, and the
// high-lift pumps draw more current at full speed than at low speed.
func TestReadingsFollowTheWeather(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	rs := s.PositionReadings(tag(tagIntake, tagKindPump, 2))
	mean := func(keep func(r Reading) bool, v func(r Reading) float64) float64 {
		sum, n := 0.0, 0
		for _, r := range rs {
			if keep(r) {
				sum += v(r)
				n++
			}
		}
		return sum / float64(n)
	}
	amb := func(r Reading) float64 { return r.AmbientC }
	local := func(r Reading) time.Time { return r.At.Add(localOffset) }
	july := mean(func(r Reading) bool { return local(r).Month() == time.July }, amb)
	jan := mean(func(r Reading) bool { return local(r).Month() == time.January }, amb)
	if july-jan < 6 {
		t.Errorf("intake air July %.1f °C, January %.1f °C: want a seasonal cycle of at least 6 K", july, jan)
	}
	afternoon := mean(func(r Reading) bool { return local(r).Hour() == 15 }, amb)
	night := mean(func(r Reading) bool { return local(r).Hour() == 5 }, amb)
	if afternoon-night < 3 {
		t.Errorf("intake air 15:00 %.1f °C, 05:00 %.1f °C: want a daily cycle of at least 3 K", afternoon, night)
	}
	hs := func(r Reading) float64 { return r.HeatsinkC - r.AmbientC }
	cur := func(r Reading) float64 { return r.CurrentA }
	fast := func(r Reading) bool { return r.FrequencyHz >= 48 }
	slow := func(r Reading) bool { return r.FrequencyHz > 0 && r.FrequencyHz < 44 }
	if c1, c0 := mean(fast, cur), mean(slow, cur); c1 <= c0 {
		t.Errorf("raw water pump current %.1f A at full speed, %.1f A at low speed: want more at full speed", c1, c0)
	}
	if h1, h0 := mean(fast, hs), mean(slow, hs); h1 <= h0 {
		t.Errorf("heatsink rise %.1f K at full speed, %.1f K at low speed: want more at full speed", h1, h0)
	}
	running := 0
	for _, r := range rs {
		if r.FrequencyHz > 0 {
			running++
		}
	}
	if share := float64(running) / float64(len(rs)); share < 0.2 || share > 0.9 {
		t.Errorf("raw water pump runs %.0f %% of hours, want running and stopped periods", 100*share)
	}
}
