package store

import (
	"fmt"
	"math"
	"time"
)

// Reading is one logged sample of a drive's condition. Measurements that
// were not logged are nil. JSON and CSV use the same names as the table
// columns (DESIGN.md section 5: the unit sits in the name).
//
// On input a reading names its position by tag (Position) and, where the tag
// is used at more than one site, the site by name (Site); the store finds
// the drive installed there at At. Read back, a reading carries DriveID,
// PositionID and the position's tag, and no site.
type Reading struct {
	// DriveID is the drive installed at the position at At. Output only.
	DriveID int64 `json:"drive_id,omitempty"`
	// PositionID is the position the reading came from. On output it is
	// always set; a Go caller of Ingest may set it instead of Position.
	PositionID int64 `json:"position_id,omitempty"`
	// Site is the site's name, needed on input only where the position tag
	// is used at several sites.
	Site string `json:"site,omitempty"`
	// Position is the position's tag.
	Position string `json:"position,omitempty"`
	// At is the end of the interval the reading describes (UTC, kept to the
	// microsecond).
	At time.Time `json:"at"`

	InternalAirC  *float64 `json:"internal_air_c"` // air inside the drive or its cabinet
	AmbientC      *float64 `json:"ambient_c"`      // air around the drive or its cabinet
	HeatsinkC     *float64 `json:"heatsink_c"`
	CurrentA      *float64 `json:"current_a"`      // mean output current over the interval
	PeakCurrentA  *float64 `json:"peak_current_a"` // highest output current over the interval
	FrequencyHz   *float64 `json:"frequency_hz"`   // output frequency; 0 when stopped
	BusV          *float64 `json:"bus_v"`          // DC-bus voltage (mean)
	BusRippleV    *float64 `json:"bus_ripple_v"`   // DC-bus ripple, peak to peak
	RunHoursH     *float64 `json:"run_hours_h"`    // the drive's run-hours counter
	PowerOnHoursH *float64 `json:"power_on_hours_h"`
	// DriveCapacitorLifeUsedFraction and DriveFanLifeUsedFraction are the
	// drive's own estimates, where it makes them (1 = 100 %).
	DriveCapacitorLifeUsedFraction *float64 `json:"drive_capacitor_life_used_fraction"`
	DriveFanLifeUsedFraction       *float64 `json:"drive_fan_life_used_fraction"`
	CapacitanceUF                  *float64 `json:"capacitance_uf"` // DC-bus capacitance the drive reports
	ESRMilliohm                    *float64 `json:"esr_milliohm"`   // equivalent series resistance the drive reports

	// Row and Line say where the reading stood in its request (1-based data
	// row; line of a CSV file or JSON body); the parsers set them and Ingest
	// reports them. Zero Row means the reading's place in the slice.
	Row  int `json:"-"`
	Line int `json:"-"`
}

// readingValueCount is the number of measurement columns.
const readingValueCount = 14

// readingValueNames lists the measurement columns in table order.
var readingValueNames = [readingValueCount]string{
	"internal_air_c", "ambient_c", "heatsink_c", "current_a", "peak_current_a", "frequency_hz", "bus_v",
	"bus_ripple_v", "run_hours_h", "power_on_hours_h", "drive_capacitor_life_used_fraction",
	"drive_fan_life_used_fraction", "capacitance_uf", "esr_milliohm",
}

// valueSlots returns pointers to the measurement fields in table order.
func (r *Reading) valueSlots() [readingValueCount]**float64 {
	return [readingValueCount]**float64{
		&r.InternalAirC, &r.AmbientC, &r.HeatsinkC, &r.CurrentA, &r.PeakCurrentA, &r.FrequencyHz, &r.BusV,
		&r.BusRippleV, &r.RunHoursH, &r.PowerOnHoursH, &r.DriveCapacitorLifeUsedFraction,
		&r.DriveFanLifeUsedFraction, &r.CapacitanceUF, &r.ESRMilliohm,
	}
}

// values returns the measurement fields in table order.
func (r *Reading) values() [readingValueCount]*float64 {
	return [readingValueCount]*float64{
		r.InternalAirC, r.AmbientC, r.HeatsinkC, r.CurrentA, r.PeakCurrentA, r.FrequencyHz, r.BusV,
		r.BusRippleV, r.RunHoursH, r.PowerOnHoursH, r.DriveCapacitorLifeUsedFraction,
		r.DriveFanLifeUsedFraction, r.CapacitanceUF, r.ESRMilliohm,
	}
}

// ReadingValueColumns lists the measurement columns in table order.
func ReadingValueColumns() []string { return append([]string(nil), readingValueNames[:]...) }

// ReadingInputColumns lists every column a posted reading may carry: site,
// position, at and the measurements.
func ReadingInputColumns() []string {
	return append([]string{"site", "position", "at"}, readingValueNames[:]...)
}

// ReadingOutputColumns lists the columns of a reading read back: drive_id,
// position_id, position, at and the measurements.
func ReadingOutputColumns() []string {
	return append([]string{"drive_id", "position_id", "position", "at"}, readingValueNames[:]...)
}

// Plausible ranges for readings (DESIGN.md section 3 and the project brief).
// They catch unit and wiring mistakes, not drives in trouble: an honest
// extreme reading must pass.
const (
	// readingMinC and readingMaxC bound every temperature. An electronics
	// enclosure reading outside -50…150 °C is a sensor or unit fault
	// (common practice).
	readingMinC = -50
	readingMaxC = 150
	// readingMaxCurrentMultiple bounds mean and peak current at ten times
	// the drive model's normal-duty rated current, far above any overload a
	// drive survives (common practice).
	readingMaxCurrentMultiple = 10
	// readingMaxAhead is how far past the store's clock a reading may be
	// dated, to allow for clock drift at the source.
	readingMaxAhead = 5 * time.Minute
)

// valueRule is how one measurement column is checked before lookups.
type valueRule int

const (
	ruleTemperature valueRule = iota // readingMinC … readingMaxC
	ruleNonNegative                  // ≥ 0
	ruleCurrent                      // ≥ 0 here; the rated-current bound needs the drive
)

var readingValueRules = [readingValueCount]valueRule{
	ruleTemperature, ruleTemperature, ruleTemperature, ruleCurrent, ruleCurrent, ruleNonNegative, ruleNonNegative,
	ruleNonNegative, ruleNonNegative, ruleNonNegative, ruleNonNegative,
	ruleNonNegative, ruleNonNegative, ruleNonNegative,
}

// reasonNotFinite is the reason given for NaN or an infinity.
const reasonNotFinite = "must be a finite number"

// checkValue returns why v is implausible for column i, or "".
func checkValue(i int, v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return reasonNotFinite
	}
	switch readingValueRules[i] {
	case ruleTemperature:
		if v < readingMinC || v > readingMaxC {
			return fmt.Sprintf("must lie between %d and %d °C", readingMinC, readingMaxC)
		}
	case ruleNonNegative, ruleCurrent:
		if v < 0 {
			return "must not be negative"
		}
	}
	return ""
}

// IngestOptions tunes Ingest.
type IngestOptions struct {
	// Partial stores the valid rows and reports the others; without it any
	// bad row refuses the whole batch.
	Partial bool
	// PositionID, when set, is the position of every row (POST
	// /positions/{id}/readings); a row that names a position or site must
	// then name this one.
	PositionID int64
	// Refused lists rows a parser could not read; they count as bad rows
	// (the batch fails unless Partial) and appear in the answer.
	Refused []FieldError
}

// IngestResult reports a batch.
type IngestResult struct {
	// Inserted counts new readings stored.
	Inserted int `json:"inserted"`
	// AlreadyPresent counts readings already stored with identical values
	// (a replayed batch).
	AlreadyPresent int `json:"already_present"`
	// Conflicts lists readings whose drive and time are stored with other
	// values; the stored values are kept.
	Conflicts []Conflict `json:"conflicts"`
	// Rejected lists the bad rows of a partial batch (one entry per bad
	// field).
	Rejected []FieldError `json:"rejected"`
}

// Conflict is a posted reading whose drive and time are already stored with
// different values.
type Conflict struct {
	Row     int       `json:"row"`
	Line    int       `json:"line,omitempty"`
	DriveID int64     `json:"drive_id"`
	At      time.Time `json:"at"`
	// Fields names the columns whose values differ.
	Fields []string `json:"fields"`
}
