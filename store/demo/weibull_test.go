package demo

import (
	"math"
	"slices"
	"testing"
	"time"

	"kelvard/health"
)

// componentLives returns the lives of one kind of part on every drive of a
// model: each part from its fitting (the drive's manufacture, or a
// replacement row) to its failure, its replacement, the drive's retirement
// or Now. A life that ends in a failure event of the part's mode is a
// failure; every other life is a suspension (right-censored).
func componentLives(s *Scenario, model string, kind health.ComponentKind, mode health.FailureMode) []health.LifeRecord {
	var out []health.LifeRecord
	for _, d := range s.Drives {
		if d.Model != model {
			continue
		}
		starts := []time.Time{d.ManufacturedAt}
		for _, c := range s.Components {
			if c.Serial == d.Serial && c.Kind == kind {
				starts = append(starts, c.InstalledAt)
			}
		}
		slices.SortFunc(starts, func(a, b time.Time) int { return a.Compare(b) })
		end := s.Now
		if d.Status == health.StatusRetired && d.LastEnergisedAt != nil {
			end = *d.LastEnergisedAt
		}
		for i, st := range starts {
			stop := end
			if i+1 < len(starts) {
				stop = starts[i+1]
			}
			rec := health.LifeRecord{AgeH: stop.Sub(st).Hours()}
			for _, e := range s.Events {
				if e.Serial == d.Serial && e.Type == health.EventFailure && e.FailureMode == mode && e.At.After(st) && !e.At.After(stop) {
					rec = health.LifeRecord{AgeH: e.At.Sub(st).Hours(), Failed: true}
					break
				}
			}
			if rec.AgeH > 0 {
				out = append(out, rec)
			}
		}
	}
	return out
}

// TestWeibullFitsPerModelAndMode checks that the history carries enough
// capacitor and fan failures for a Weibull fit (health.FitWeibull, at least
// three failures) per main model and failure mode, and that the fits are
// finite.
func TestWeibullFitsPerModelAndMode(t *testing.T) {
	t.Parallel()
	s := demoScenario()
	mains := s.MainModels()
	if len(mains) < 2 {
		t.Fatalf("main models %v, want at least two", mains)
	}
	for _, m := range mains {
		for _, c := range []struct {
			kind health.ComponentKind
			mode health.FailureMode
		}{{health.ComponentCapacitors, health.FailureCapacitors}, {health.ComponentFan, health.FailureFan}} {
			res, err := health.FitWeibull(componentLives(s, m, c.kind, c.mode), health.WeibullOptions{})
			if err != nil {
				t.Fatalf("%s %s: %v", m, c.mode, err)
			}
			if res.Status != health.WeibullFitted || res.Failures < 3 {
				t.Errorf("%s %s: %d failures, %d suspensions, status %s", m, c.mode, res.Failures, res.Suspensions, res.Status)
				continue
			}
			f := res.Fit
			if math.IsNaN(f.Shape) || f.Shape <= 0 || math.IsNaN(f.Scale) || f.Scale <= 0 || math.IsNaN(f.B10H) {
				t.Errorf("%s %s: fit %+v", m, c.mode, f)
			}
		}
	}
}
