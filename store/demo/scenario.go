// Package demo generates kelvard's demo fleet: an invented regional water
// and wastewater utility on a warm coast (DESIGN.md section 6), with its
// register, eight years of installation, failure and replacement history,
// and a year of hourly readings, deterministically from a seed and a
// reference time.
//
// Generate builds the register rows in memory; readings are produced on
// demand (Scenario.Readings, Scenario.PositionReadings), so a year of
// hourly readings for eighty positions never has to sit in memory at once.
// WriteCSV and WriteDir write the rows in the register CSV format that the
// importer reads, in import order (Files).
package demo

import (
	"iter"
	"time"

	"kelvard/health"
	"kelvard/store"
)

// Scenario is one generated demo fleet. Every row names what it refers to
// by natural key (site and area names, model names, position tags, drive
// serials), as the register CSV files do; the embedded store rows carry no
// ids.
type Scenario struct {
	// Seed and Now are the inputs: Now is the end of the reading year,
	// truncated to the hour, in UTC.
	Seed uint64
	Now  time.Time
	// HistoryStart is when the eight years of history begin.
	HistoryStart time.Time
	// ReadingsStart is the start of the reading year: the first reading is
	// at ReadingsStart + 1 h, the last at Now.
	ReadingsStart time.Time

	Sites         []store.Site
	Areas         []Area
	Models        []store.DriveModel
	Positions     []Position
	Drives        []Drive
	Installations []Installation
	Components    []Component
	Events        []Event
	// Planted lists the planted problems: on which position (or spare
	// drive) and which rule the assessment should raise.
	Planted []Planted

	plans    []*posPlan
	byTag    map[string]int
	climate  *regionClimate
	drivesBy map[string]int
}

// Area is an area row with its site by name.
type Area struct {
	Site string
	store.Area
}

// Position is a position row with its site and area by name.
type Position struct {
	Site string
	Area string
	store.Position
}

// Drive is a drive row with its model, site and stores area by name.
// Status is the drive's status at Now, except that a drive standing at a
// position is written with an empty status: a drive becomes installed only
// through an installation row.
type Drive struct {
	Model      string
	Site       string
	StoresArea string
	store.Drive
}

// Installation is one stay of a drive at a position. StatusAfter is the
// drive's status after RemovedAt (empty while it still stands there).
type Installation struct {
	Serial      string
	Site        string
	Position    string
	InstalledAt time.Time
	RemovedAt   *time.Time
	StatusAfter health.DriveStatus
}

// Component is a component replacement: a capacitor kit or fan kit fitted
// to a drive after it was made. Components fitted at manufacture are not
// listed (the register fits them when the drive is created).
type Component struct {
	Serial string
	store.Component
}

// Event is an event row with its drive by serial and, when the drive stood
// at a position, that position's site and tag.
type Event struct {
	Serial   string
	Site     string
	Position string
	store.Event
}

// Reading is one hourly reading of a position. Values that the drive or
// gateway does not log are NaN.
type Reading struct {
	Site     string
	Position string
	// At is the end of the hour the reading describes.
	At                             time.Time
	InternalAirC                   float64
	AmbientC                       float64
	HeatsinkC                      float64
	CurrentA                       float64
	PeakCurrentA                   float64
	FrequencyHz                    float64
	BusV                           float64
	BusRippleV                     float64
	RunHoursH                      float64
	PowerOnHoursH                  float64
	DriveCapacitorLifeUsedFraction float64
	DriveFanLifeUsedFraction       float64
	CapacitanceUF                  float64
	ESRMilliohm                    float64
}

// Sample returns the reading as the health models see it.
func (r Reading) Sample() health.Sample {
	return health.Sample{
		At: r.At.Unix(), InternalAirC: r.InternalAirC, AmbientC: r.AmbientC, HeatsinkC: r.HeatsinkC,
		CurrentA: r.CurrentA, PeakCurrentA: r.PeakCurrentA, FrequencyHz: r.FrequencyHz, BusV: r.BusV,
		BusRippleV: r.BusRippleV, CapacitanceUF: r.CapacitanceUF, ESRMilliohm: r.ESRMilliohm,
	}
}

// Planted is one planted problem: the rule the assessment should raise on
// a position (Subject is its tag) or on a drive that stands at no position
// (Subject is "drive:" and its serial).
type Planted struct {
	Subject string
	Rule    string
	// What says in a few words what was planted.
	What string
}

// Readings returns every reading of the scenario, position by position in
// register order and hour by hour within each position. The sequence is
// generated as it is read; it is the same every time for the same Seed and
// Now.
func (s *Scenario) Readings() iter.Seq[Reading] {
	return func(yield func(Reading) bool) {
		for _, p := range s.plans {
			for r := range s.positionReadings(p) {
				if !yield(r) {
					return
				}
			}
		}
	}
}

// PositionReadings returns the readings of one position in time order, or
// nil for an unknown tag.
func (s *Scenario) PositionReadings(tag string) []Reading {
	i, ok := s.byTag[tag]
	if !ok {
		return nil
	}
	var out []Reading
	for r := range s.positionReadings(s.plans[i]) {
		out = append(out, r)
	}
	return out
}

// Samples converts readings to health samples.
func Samples(rs []Reading) []health.Sample {
	out := make([]health.Sample, len(rs))
	for i, r := range rs {
		out[i] = r.Sample()
	}
	return out
}

// PositionEvents returns the events that name the position, in time order,
// as the health models see them.
func (s *Scenario) PositionEvents(tag string) []health.Event {
	var out []health.Event
	for _, e := range s.Events {
		if e.Position == tag {
			out = append(out, health.Event{At: e.At.Unix(), Type: e.Type, Cause: e.TripCause, State: e.State})
		}
	}
	return out
}

// InstalledDrive returns the drive standing at the position at Now.
func (s *Scenario) InstalledDrive(tag string) (Drive, bool) {
	for _, in := range s.Installations {
		if in.Position == tag && in.RemovedAt == nil {
			i, ok := s.drivesBy[in.Serial]
			if ok {
				return s.Drives[i], true
			}
		}
	}
	return Drive{}, false
}

// Position returns the position row with the tag.
func (s *Scenario) Position(tag string) (Position, bool) {
	i, ok := s.byTag[tag]
	if !ok {
		return Position{}, false
	}
	return s.Positions[i], true
}

// Model returns the drive model with the name.
func (s *Scenario) Model(name string) (store.DriveModel, bool) {
	for _, m := range s.Models {
		if m.Name == name {
			return m, true
		}
	}
	return store.DriveModel{}, false
}

// AreaOf returns the area row of a position.
func (s *Scenario) AreaOf(p Position) (Area, bool) {
	for _, a := range s.Areas {
		if a.Site == p.Site && a.Name == p.Area {
			return a, true
		}
	}
	return Area{}, false
}

// SiteOf returns the site row by name.
func (s *Scenario) SiteOf(name string) (store.Site, bool) {
	for _, st := range s.Sites {
		if st.Name == name {
			return st, true
		}
	}
	return store.Site{}, false
}
