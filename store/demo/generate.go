package demo

import (
	"math/rand/v2"
	"time"

	"kelvard/health"
)

// Stream keys: each part of the scenario draws from its own PCG stream, so
// changing one part never shifts another.
const (
	streamClimate = 0x636c696d617465
	streamHistory = 0x686973746f7279
)

// maxHistoryAttempts bounds the redraws of the history (see Generate).
const maxHistoryAttempts = 20

// Generate builds the demo scenario for a seed and a reference time. now is
// converted to UTC and truncated to the hour; it is the end of the reading
// year, and the eight years of history end there too. The same seed and now
// always give the same scenario, byte for byte once written.
//
// The history is drawn again, from the next stream of the same seed, when
// a draw leaves one of the main model groups (the two models at more than
// fifteen positions) with fewer than three capacitor or three fan failures:
// the fleet's Weibull fits per model and failure mode need at least three.
// The draws are deterministic, so so is the result.
func Generate(seed uint64, now time.Time) *Scenario {
	now = now.UTC().Truncate(time.Hour)
	s := &Scenario{Seed: seed, Now: now, HistoryStart: now.AddDate(-8, 0, 0), ReadingsStart: now.Add(-hoursPerYear * time.Hour)}
	sites := fleetSites()
	areas := fleetAreas(sites)
	models := fleetModels()
	s.plans = fleetPositions(areas, models)
	markPlanted(s.plans)

	for _, sd := range sites {
		s.Sites = append(s.Sites, sd.row)
	}
	for _, a := range areas {
		s.Areas = append(s.Areas, Area{Site: a.site.row.Name, Area: a.row})
	}
	for _, m := range models {
		s.Models = append(s.Models, m.row)
	}
	s.byTag = map[string]int{}
	for i, p := range s.plans {
		s.Positions = append(s.Positions, Position{Site: p.area.site.row.Name, Area: p.area.row.Name, Position: p.row})
		s.byTag[p.row.Tag] = i
	}

	s.climate = makeClimate(rand.New(rand.NewPCG(mix(seed, streamClimate), 0)), s.ReadingsStart, sites)
	for _, p := range s.plans {
		p.prof = profilePosition(s, p)
	}

	for attempt := range maxHistoryAttempts {
		s.Installations, s.Components, s.Events, s.Drives = nil, nil, nil, nil
		for _, p := range s.plans {
			p.stints, p.stops = nil, nil
		}
		simulate(s, rand.New(rand.NewPCG(mix(seed, streamHistory), uint64(attempt))))
		if mainGroupsHaveFailures(s) {
			break
		}
	}

	s.drivesBy = map[string]int{}
	for i, d := range s.Drives {
		s.drivesBy[d.Serial] = i
	}
	s.Planted = plantedPositions()
	for _, d := range s.Drives {
		if d.Notes == noteDriveShelved {
			s.Planted = append(s.Planted, plantedStorage(d.Serial))
		}
	}
	return s
}

// MainModels returns the models installed at more than fifteen positions:
// the groups whose failures a Weibull fit per model and failure mode is
// expected to use.
func (s *Scenario) MainModels() []string {
	count := map[string]int{}
	for _, p := range s.plans {
		count[p.model.row.Name]++
	}
	var out []string
	for _, m := range s.Models {
		if count[m.Name] > 15 {
			out = append(out, m.Name)
		}
	}
	return out
}

// mainGroupsHaveFailures reports whether every main model group has at
// least three capacitor and three fan failures.
func mainGroupsHaveFailures(s *Scenario) bool {
	model := map[string]string{}
	for _, p := range s.plans {
		model[p.row.Tag] = p.model.row.Name
	}
	n := map[string]int{}
	for _, e := range s.Events {
		if e.Type == health.EventFailure {
			n[model[e.Position]+"/"+string(e.FailureMode)]++
		}
	}
	for _, m := range s.MainModels() {
		if n[m+"/"+string(health.FailureCapacitors)] < 3 || n[m+"/"+string(health.FailureFan)] < 3 {
			return false
		}
	}
	return true
}
