package health

import "math"

// Sample is one logged reading as the models see it. At is the end of the
// interval the reading describes, in Unix seconds (UTC). Any measurement that
// was not logged is NaN; callers test with math.IsNaN. Samples passed to a
// model are sorted by At unless the function says otherwise.
type Sample struct {
	At            int64
	InternalAirC  float64 // air inside the drive or its cabinet
	AmbientC      float64 // air around the drive or its cabinet
	HeatsinkC     float64
	CurrentA      float64 // mean output current over the interval
	PeakCurrentA  float64 // highest output current over the interval
	FrequencyHz   float64 // output frequency; 0 when stopped
	BusV          float64 // DC-bus voltage (mean)
	BusRippleV    float64 // DC-bus ripple, peak to peak
	CapacitanceUF float64 // capacitance the drive reports, when it does
	ESRMilliohm   float64 // equivalent series resistance the drive reports
}

// LedgerSample returns s with only the fields the life ledgers read
// (AccumulateCapacitor, AccumulateFan and the cabinet air estimate they
// use): the time, internal air, ambient, heatsink, current and frequency.
// The others, which only the window checks read, are NaN. A full
// recompute may read readings older than the window this way.
func LedgerSample(s Sample) Sample {
	n := math.NaN()
	s.PeakCurrentA, s.BusV, s.BusRippleV, s.CapacitanceUF, s.ESRMilliohm = n, n, n, n, n
	return s
}

// Running reports whether the drive was running during the sample: output
// frequency above zero, or, when frequency is not logged, output current
// above zero.
func (s Sample) Running() bool {
	if s.FrequencyHz == s.FrequencyHz { // not NaN
		return s.FrequencyHz > 0
	}
	return s.CurrentA == s.CurrentA && s.CurrentA > 0
}

// OperatingState is what a drive was doing when an event happened.
type OperatingState string

// Operating states.
const (
	StateUnknown      OperatingState = ""
	StateAccelerating OperatingState = "accelerating"
	StateSteady       OperatingState = "steady"
	StateDecelerating OperatingState = "decelerating"
	StateStopped      OperatingState = "stopped"
)

// OperatingStates returns every known operating state (the empty unknown
// state excluded).
func OperatingStates() []OperatingState {
	return []OperatingState{StateAccelerating, StateSteady, StateDecelerating, StateStopped}
}

// Valid reports whether s is known or empty.
func (s OperatingState) Valid() bool {
	if s == StateUnknown {
		return true
	}
	for _, v := range OperatingStates() {
		if s == v {
			return true
		}
	}
	return false
}

// Event is one logged event as the models see it. At is Unix seconds (UTC).
type Event struct {
	At    int64
	Type  EventType
	Cause TripCause      // for trips
	State OperatingState // what the drive was doing, when known
}

// RuleInfo describes a rule: its stable dotted identifier, kind, a short
// title and the usual remedy. Every rule a model can raise has one entry in
// Catalogue.
type RuleInfo struct {
	ID     string `json:"id"`
	Kind   Kind   `json:"kind"`
	Title  string `json:"title"`
	Remedy string `json:"remedy"`
}

// SafetyCaution is the caution shown wherever kelvard proposes physical work
// on a drive (DESIGN.md section 7).
const SafetyCaution = "Drive work is dangerous: the DC bus stays charged after the supply is isolated. " +
	"Isolate and lock out the supply, wait at least the discharge time the drive maker states, " +
	"and verify zero voltage on the DC bus with a rated meter before touching anything. " +
	"Follow the drive maker's manual, local electrical codes and licensed practice. " +
	"kelvard's estimates support planning; they do not certify equipment."
