package plan

import (
	"time"

	"kelvard/health"
	"kelvard/store"
)

// This file turns the register's history into unit lives for the Weibull
// fits (ISO 14224 counts failures per unit, so lives follow the unit, not
// the position).
//
// What "age" means, in hours:
//
//   - DC-bus capacitor and cooling fan failure modes: component age, the
//     calendar hours since that component was fitted (components.installed_at)
//     to its failure, its removal, the drive's retirement or now. A
//     component's life is one life; a removal without a failure of its mode
//     (a planned replacement, a failure of the other part) is a suspension.
//     Calendar time is used because capacitors age on the shelf too and
//     fans run whenever the drive is powered.
//   - Every other failure mode, and "any" mode: unit age in service, the
//     hours the unit stood installed at a position, from its first
//     installation, or from the last failure that ended a life, to the
//     failure, or to its removal, retirement or now. For a single unit mode
//     a life ends at any failure other than of capacitors or fan (those
//     parts are renewed and the rest of the unit goes on ageing); for "any"
//     it ends at every failure. Failures of other modes are suspensions
//     (health.LifeRecords). A failure at age 0 (dead on arrival) cannot be
//     fitted and is left out.

// life is one life of a unit or component, with what groups it.
type life struct {
	history health.UnitHistory
	driveID int64
	modelID int64
	// areaID is the area of the position the unit stood at when the life
	// ended (or stands at now); hasArea is false for a life spent in
	// stores.
	areaID  int64
	hasArea bool
	// running is true for the current life of an installed drive: the
	// unit is still in service and can fail next.
	running bool
	// componentID is the component of a component life.
	componentID int64
	end         time.Time
}

const secondsPerHour = 3600.0

func hoursBetween(a, b time.Time) float64 { return b.Sub(a).Seconds() / secondsPerHour }

// driveEnd is when a drive's history ends: now for a drive in use, the
// last removal from a position for a retired one.
func (ix *index) driveEnd(dr store.Drive, at time.Time) time.Time {
	if dr.Status != health.StatusRetired {
		return at
	}
	end := dr.UpdatedAt
	if ins := ix.installs[dr.ID]; len(ins) > 0 {
		if last := ins[len(ins)-1]; last.RemovedAt != nil {
			end = *last.RemovedAt
		}
	}
	if end.After(at) || end.IsZero() {
		end = at
	}
	return end
}

// componentLives returns the lives of every component of the kind, failed
// by the mode that kills that component.
func (ix *index) componentLives(kind health.ComponentKind, at time.Time) []life {
	mode := health.FailureCapacitors
	if kind == health.ComponentFan {
		mode = health.FailureFan
	}
	var out []life
	for _, dr := range ix.d.Drives {
		driveEnd := ix.driveEnd(dr, at)
		for _, c := range ix.components[dr.ID] {
			if c.Kind != kind || c.InstalledAt.After(at) {
				continue
			}
			start := c.InstalledAt
			stop := driveEnd
			if c.RemovedAt != nil && c.RemovedAt.Before(stop) {
				stop = *c.RemovedAt
			}
			l := life{driveID: dr.ID, modelID: dr.ModelID, componentID: c.ID, end: stop}
			l.history = health.UnitHistory{Key: dr.Serial, AgeH: hoursBetween(start, stop)}
			for _, e := range ix.failures[dr.ID] {
				if e.FailureMode == mode && e.At.After(start) && !e.At.After(stop) {
					l.history = health.UnitHistory{Key: dr.Serial, AgeH: hoursBetween(start, e.At), Failed: true, Mode: mode}
					l.end = e.At
					break
				}
			}
			if l.history.AgeH < 0 {
				continue
			}
			l.running = c.RemovedAt == nil && dr.Status == health.StatusInstalled && !l.history.Failed
			l.areaID, l.hasArea = ix.areaAt(dr.ID, l.end)
			out = append(out, l)
		}
	}
	return out
}

// unitLives returns every unit's lives in service; ends says which failure
// modes end a life.
func (ix *index) unitLives(at time.Time, ends func(health.FailureMode) bool) []life {
	var out []life
	for _, dr := range ix.d.Drives {
		fails := ix.failures[dr.ID]
		fi := 0
		age := 0.0
		var lastArea int64
		hasArea := false
		emit := func(e store.Event) {
			if !ends(e.FailureMode) {
				return
			}
			if age > 0 {
				l := life{driveID: dr.ID, modelID: dr.ModelID, end: e.At,
					history: health.UnitHistory{Key: dr.Serial, AgeH: age, Failed: true, Mode: e.FailureMode}}
				l.areaID, l.hasArea = ix.areaAt(dr.ID, e.At)
				out = append(out, l)
			}
			age = 0
		}
		for _, in := range ix.installs[dr.ID] {
			from := in.InstalledAt
			if from.After(at) {
				break
			}
			to := at
			if in.RemovedAt != nil && in.RemovedAt.Before(to) {
				to = *in.RemovedAt
			}
			for fi < len(fails) && fails[fi].At.Before(from) {
				emit(fails[fi])
				fi++
			}
			cursor := from
			for fi < len(fails) && !fails[fi].At.After(to) {
				age += hoursBetween(cursor, fails[fi].At)
				cursor = fails[fi].At
				emit(fails[fi])
				fi++
			}
			age += hoursBetween(cursor, to)
			if p, ok := ix.d.Positions[in.PositionID]; ok {
				lastArea, hasArea = p.AreaID, true
			}
		}
		for ; fi < len(fails) && !fails[fi].At.After(at); fi++ {
			emit(fails[fi])
		}
		if dr.Status == health.StatusInstalled || age > 0 {
			out = append(out, life{driveID: dr.ID, modelID: dr.ModelID, areaID: lastArea, hasArea: hasArea,
				running: dr.Status == health.StatusInstalled, end: at,
				history: health.UnitHistory{Key: dr.Serial, AgeH: age}})
		}
	}
	return out
}

// isComponentMode reports whether a failure mode is a component's, renewed
// by fitting a new part.
func isComponentMode(m health.FailureMode) bool {
	return m == health.FailureCapacitors || m == health.FailureFan
}
