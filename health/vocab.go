package health

import (
	"fmt"
	"slices"
)

// This file holds the shared vocabulary of kelvard: the enumerations that the
// register stores, the API validates and the models reason about. Each type
// has a Valid method and a list of its values so that callers outside this
// package (validation, OpenAPI document, pages) never repeat the lists.

// Kind groups findings by what they are about. The values are part of the
// public contract (DESIGN.md section 5).
type Kind string

// Finding kinds.
const (
	KindEnclosure   Kind = "enclosure"
	KindEnvironment Kind = "environment"
	KindDerating    Kind = "derating"
	KindCapacitor   Kind = "capacitor"
	KindFan         Kind = "fan"
	KindDCBus       Kind = "dc_bus"
	KindStorage     Kind = "storage"
	KindDataQuality Kind = "data_quality"
)

var kinds = []Kind{KindEnclosure, KindEnvironment, KindDerating, KindCapacitor, KindFan, KindDCBus, KindStorage, KindDataQuality}

// Kinds returns every finding kind in contract order.
func Kinds() []Kind { return slices.Clone(kinds) }

// Valid reports whether k is a known kind.
func (k Kind) Valid() bool { return slices.Contains(kinds, k) }

// Severity ranks a finding. The order, most severe first, is critical, major,
// minor, advice.
type Severity string

// Finding severities.
const (
	SeverityCritical Severity = "critical"
	SeverityMajor    Severity = "major"
	SeverityMinor    Severity = "minor"
	SeverityAdvice   Severity = "advice"
)

var severities = []Severity{SeverityCritical, SeverityMajor, SeverityMinor, SeverityAdvice}

// Severities returns every severity, most severe first.
func Severities() []Severity { return slices.Clone(severities) }

// Valid reports whether s is a known severity.
func (s Severity) Valid() bool { return slices.Contains(severities, s) }

// Rank returns 4 for critical down to 1 for advice, and 0 for an unknown
// value, so that a larger number is always worse.
func (s Severity) Rank() int {
	i := slices.Index(severities, s)
	if i < 0 {
		return 0
	}
	return len(severities) - i
}

// Band is the health band of a drive, from best to worst: sound, watch, plan,
// urgent.
type Band string

// Health bands.
const (
	BandSound  Band = "sound"
	BandWatch  Band = "watch"
	BandPlan   Band = "plan"
	BandUrgent Band = "urgent"
)

var bands = []Band{BandSound, BandWatch, BandPlan, BandUrgent}

// Bands returns every health band from best to worst.
func Bands() []Band { return slices.Clone(bands) }

// Valid reports whether b is a known band.
func (b Band) Valid() bool { return slices.Contains(bands, b) }

// Evidence is one fact behind a finding: a measured or registered value, the
// limit it was compared with, and where the limit comes from.
type Evidence struct {
	// Name says what the value is, in plain words or a field name.
	Name string `json:"name"`
	// Value is a number, a string or a bool.
	Value any `json:"value"`
	// Unit is the SI unit of Value and Limit, empty for plain numbers.
	Unit string `json:"unit,omitempty"`
	// Limit is the threshold Value was compared with, when there is one.
	Limit any `json:"limit,omitempty"`
	// Source names the standard, reference or practice behind the limit.
	Source string `json:"source,omitempty"`
}

// Finding is one rule that holds for a drive at its position. Rule is a
// stable dotted identifier (for example "enclosure.water").
type Finding struct {
	Rule     string     `json:"rule"`
	Kind     Kind       `json:"kind"`
	Severity Severity   `json:"severity"`
	Message  string     `json:"message"`
	Evidence []Evidence `json:"evidence"`
	Remedy   string     `json:"remedy"`
	// PhysicalWork is true when the remedy means work on or at the drive;
	// front ends then show SafetyCaution beside it and planning may turn
	// the finding into a work order.
	PhysicalWork bool `json:"physical_work"`
}

// Location says whether an area is indoors or outdoors.
type Location string

// Locations.
const (
	Indoor  Location = "indoor"
	Outdoor Location = "outdoor"
)

// Valid reports whether l is known.
func (l Location) Valid() bool { return l == Indoor || l == Outdoor }

// Locations returns every location value.
func Locations() []Location { return []Location{Indoor, Outdoor} }

// Sun is the direct sun exposure of an area or an outdoor cabinet.
type Sun string

// Sun exposures.
const (
	SunNone    Sun = "none"
	SunPartial Sun = "partial"
	SunFull    Sun = "full"
)

// Suns returns every sun exposure value.
func Suns() []Sun { return []Sun{SunNone, SunPartial, SunFull} }

// Valid reports whether s is known.
func (s Sun) Valid() bool { return slices.Contains(Suns(), s) }

// Water is the worst water exposure in an area, in increasing order.
type Water string

// Water exposures, mildest first.
const (
	WaterNone                Water = "none"
	WaterDripping            Water = "dripping"
	WaterSplashing           Water = "splashing"
	WaterHoseDown            Water = "hose_down"
	WaterHotWashdown         Water = "hot_washdown"
	WaterTemporarySubmersion Water = "temporary_submersion"
)

var waters = []Water{WaterNone, WaterDripping, WaterSplashing, WaterHoseDown, WaterHotWashdown, WaterTemporarySubmersion}

// Waters returns every water exposure, mildest first.
func Waters() []Water { return slices.Clone(waters) }

// Valid reports whether w is known.
func (w Water) Valid() bool { return slices.Contains(waters, w) }

// Dust is the kind of dust in an area.
type Dust string

// Dust exposures.
const (
	DustNone       Dust = "none"
	DustSettling   Dust = "settling"
	DustFibres     Dust = "circulating_fibres"
	DustWindblown  Dust = "windblown"
	DustConductive Dust = "conductive"
)

var dusts = []Dust{DustNone, DustSettling, DustFibres, DustWindblown, DustConductive}

// Dusts returns every dust exposure.
func Dusts() []Dust { return slices.Clone(dusts) }

// Valid reports whether d is known.
func (d Dust) Valid() bool { return slices.Contains(dusts, d) }

// Oil is the oil exposure of an area.
type Oil string

// Oil exposures.
const (
	OilNone    Oil = "none"
	OilSeepage Oil = "seepage"
	OilSpray   Oil = "spray"
)

// Oils returns every oil exposure.
func Oils() []Oil { return []Oil{OilNone, OilSeepage, OilSpray} }

// Valid reports whether o is known.
func (o Oil) Valid() bool { return slices.Contains(Oils(), o) }

// Corrosion is the airborne corrosion severity level of ANSI/ISA-71.04-2013.
type Corrosion string

// ISA-71.04 severity levels.
const (
	CorrosionG1 Corrosion = "G1"
	CorrosionG2 Corrosion = "G2"
	CorrosionG3 Corrosion = "G3"
	CorrosionGX Corrosion = "GX"
)

var corrosions = []Corrosion{CorrosionG1, CorrosionG2, CorrosionG3, CorrosionGX}

// Corrosions returns every ISA-71.04 level, mildest first.
func Corrosions() []Corrosion { return slices.Clone(corrosions) }

// Valid reports whether c is known.
func (c Corrosion) Valid() bool { return slices.Contains(corrosions, c) }

// Rank returns 1 for G1 up to 4 for GX, and 0 for an unknown value.
func (c Corrosion) Rank() int { return slices.Index(corrosions, c) + 1 }

// Environment is the environment profile of an area (DESIGN.md section 3).
type Environment struct {
	Location       Location  `json:"location"`
	Sun            Sun       `json:"sun"`
	AmbientMinC    float64   `json:"ambient_min_c"`
	AmbientMaxC    float64   `json:"ambient_max_c"`
	Water          Water     `json:"water"`
	Dust           Dust      `json:"dust"`
	Oil            Oil       `json:"oil"`
	Condensation   bool      `json:"condensation"`
	SaltAir        bool      `json:"salt_air"`
	Corrosion      Corrosion `json:"corrosion"`
	HazardousClass bool      `json:"hazardous_classified"`
}

// Validate checks every enumerated field and the ambient range and returns
// one error per bad field, keyed by its JSON name.
func (e Environment) Validate() map[string]string {
	bad := map[string]string{}
	if !e.Location.Valid() {
		bad["location"] = fmt.Sprintf("must be one of %v", Locations())
	}
	if !e.Sun.Valid() {
		bad["sun"] = fmt.Sprintf("must be one of %v", Suns())
	}
	if !e.Water.Valid() {
		bad["water"] = fmt.Sprintf("must be one of %v", Waters())
	}
	if !e.Dust.Valid() {
		bad["dust"] = fmt.Sprintf("must be one of %v", Dusts())
	}
	if !e.Oil.Valid() {
		bad["oil"] = fmt.Sprintf("must be one of %v", Oils())
	}
	if !e.Corrosion.Valid() {
		bad["corrosion"] = fmt.Sprintf("must be one of %v", Corrosions())
	}
	if e.AmbientMinC < -60 || e.AmbientMinC > 80 {
		bad["ambient_min_c"] = "must lie between -60 and 80"
	}
	if e.AmbientMaxC < -60 || e.AmbientMaxC > 80 {
		bad["ambient_max_c"] = "must lie between -60 and 80"
	}
	if e.AmbientMaxC < e.AmbientMinC {
		bad["ambient_max_c"] = "must not be below ambient_min_c"
	}
	return bad
}

// Duty is the duty class a drive is applied in.
type Duty string

// Duty classes: normal duty (about 110 % for 60 s every 10 min) and heavy
// duty (about 150 % for 60 s every 10 min), common practice.
const (
	DutyNormal Duty = "normal"
	DutyHeavy  Duty = "heavy"
)

// Duties returns every duty class.
func Duties() []Duty { return []Duty{DutyNormal, DutyHeavy} }

// Valid reports whether d is known.
func (d Duty) Valid() bool { return d == DutyNormal || d == DutyHeavy }

// Mounting says whether a drive stands in its own enclosure or inside a
// cabinet.
type Mounting string

// Mountings.
const (
	MountingOwn     Mounting = "own_enclosure"
	MountingCabinet Mounting = "cabinet"
)

// Mountings returns every mounting.
func Mountings() []Mounting { return []Mounting{MountingOwn, MountingCabinet} }

// Valid reports whether m is known.
func (m Mounting) Valid() bool { return m == MountingOwn || m == MountingCabinet }

// Cooling is how a cabinet rejects heat.
type Cooling string

// Cabinet cooling methods.
const (
	CoolingSealed         Cooling = "sealed"
	CoolingFanVentilated  Cooling = "fan_ventilated"
	CoolingAirConditioned Cooling = "air_conditioned"
)

// Coolings returns every cabinet cooling method.
func Coolings() []Cooling {
	return []Cooling{CoolingSealed, CoolingFanVentilated, CoolingAirConditioned}
}

// Valid reports whether c is known.
func (c Cooling) Valid() bool { return slices.Contains(Coolings(), c) }

// Material is the cabinet wall material, which sets its heat transfer
// coefficient.
type Material string

// Cabinet materials.
const (
	MaterialPaintedSteel Material = "painted_steel"
	MaterialStainless    Material = "stainless_steel"
	MaterialAluminium    Material = "aluminium"
	MaterialPlastic      Material = "plastic"
)

// Materials returns every cabinet material.
func Materials() []Material {
	return []Material{MaterialPaintedSteel, MaterialStainless, MaterialAluminium, MaterialPlastic}
}

// Valid reports whether m is known.
func (m Material) Valid() bool { return slices.Contains(Materials(), m) }

// FanRuns says when a drive's cooling fan runs.
type FanRuns string

// Fan running modes.
const (
	FanAlways   FanRuns = "always"
	FanWhenWarm FanRuns = "when_warm"
)

// FanRunsValues returns every fan running mode.
func FanRunsValues() []FanRuns { return []FanRuns{FanAlways, FanWhenWarm} }

// Valid reports whether f is known.
func (f FanRuns) Valid() bool { return f == FanAlways || f == FanWhenWarm }

// Criticality ranks how much a position matters to the process: A (loss
// stops the process or endangers people), B (degrades it), C (little
// effect). ABC ranking is common practice in maintenance planning.
type Criticality string

// Criticality ranks.
const (
	CriticalityA Criticality = "A"
	CriticalityB Criticality = "B"
	CriticalityC Criticality = "C"
)

// Criticalities returns every rank, most critical first.
func Criticalities() []Criticality { return []Criticality{CriticalityA, CriticalityB, CriticalityC} }

// Valid reports whether c is known.
func (c Criticality) Valid() bool { return slices.Contains(Criticalities(), c) }

// DriveStatus is where a physical unit is in its life.
type DriveStatus string

// Drive statuses.
const (
	StatusInstalled DriveStatus = "installed"
	StatusInStores  DriveStatus = "in_stores"
	StatusInRepair  DriveStatus = "in_repair"
	StatusRetired   DriveStatus = "retired"
)

// DriveStatuses returns every drive status.
func DriveStatuses() []DriveStatus {
	return []DriveStatus{StatusInstalled, StatusInStores, StatusInRepair, StatusRetired}
}

// Valid reports whether s is known.
func (s DriveStatus) Valid() bool { return slices.Contains(DriveStatuses(), s) }

// ComponentKind is a wearing part of a drive whose life kelvard tracks.
type ComponentKind string

// Component kinds.
const (
	ComponentCapacitors ComponentKind = "dc_bus_capacitors"
	ComponentFan        ComponentKind = "cooling_fan"
)

// ComponentKinds returns every component kind.
func ComponentKinds() []ComponentKind { return []ComponentKind{ComponentCapacitors, ComponentFan} }

// Valid reports whether k is known.
func (k ComponentKind) Valid() bool { return k == ComponentCapacitors || k == ComponentFan }

// EventType is the type of a logged event.
type EventType string

// Event types.
const (
	EventTrip              EventType = "trip"
	EventPowerUp           EventType = "power_up"
	EventPowerDown         EventType = "power_down"
	EventComponentReplaced EventType = "component_replaced"
	EventFailure           EventType = "failure"
)

// EventTypes returns every event type.
func EventTypes() []EventType {
	return []EventType{EventTrip, EventPowerUp, EventPowerDown, EventComponentReplaced, EventFailure}
}

// Valid reports whether t is known.
func (t EventType) Valid() bool { return slices.Contains(EventTypes(), t) }

// TripCause is the cause a drive names when it trips.
type TripCause string

// Trip causes.
const (
	TripOverVoltage     TripCause = "over_voltage"
	TripOverCurrent     TripCause = "over_current"
	TripOverload        TripCause = "overload"
	TripOverTemperature TripCause = "over_temperature"
	TripUnderVoltage    TripCause = "under_voltage"
	TripGroundFault     TripCause = "ground_fault"
	TripPhaseLoss       TripCause = "phase_loss"
	TripOther           TripCause = "other"
)

// TripCauses returns every trip cause.
func TripCauses() []TripCause {
	return []TripCause{TripOverVoltage, TripOverCurrent, TripOverload, TripOverTemperature, TripUnderVoltage, TripGroundFault, TripPhaseLoss, TripOther}
}

// Valid reports whether c is known.
func (c TripCause) Valid() bool { return slices.Contains(TripCauses(), c) }

// FailureMode is the part or function that failed, in trade words, after
// the spirit of ISO 14224's failure-mode and maintainable-item lists.
type FailureMode string

// Failure modes.
const (
	FailureCapacitors   FailureMode = "dc_bus_capacitors"
	FailureFan          FailureMode = "cooling_fan"
	FailurePowerModule  FailureMode = "power_module"
	FailureRectifier    FailureMode = "rectifier"
	FailureSoftCharge   FailureMode = "soft_charge_circuit"
	FailureControlBoard FailureMode = "control_board"
	FailurePowerSupply  FailureMode = "auxiliary_power_supply"
	FailureConnections  FailureMode = "terminals_and_connections"
	FailureOther        FailureMode = "other"
)

// FailureModes returns every failure mode.
func FailureModes() []FailureMode {
	return []FailureMode{FailureCapacitors, FailureFan, FailurePowerModule, FailureRectifier, FailureSoftCharge, FailureControlBoard, FailurePowerSupply, FailureConnections, FailureOther}
}

// Valid reports whether m is known.
func (m FailureMode) Valid() bool { return slices.Contains(FailureModes(), m) }

// FailureCause is the underlying cause of a failure.
type FailureCause string

// Failure causes.
const (
	CauseWearOut       FailureCause = "wear_out"
	CauseHeat          FailureCause = "heat"
	CauseMoisture      FailureCause = "moisture_or_water"
	CauseCorrosion     FailureCause = "corrosion"
	CauseContamination FailureCause = "dust_or_contamination"
	CauseSupply        FailureCause = "supply_disturbance"
	CauseOverload      FailureCause = "overload"
	CauseRegeneration  FailureCause = "regenerated_energy"
	CauseInstallation  FailureCause = "installation_error"
	CauseUnknown       FailureCause = "unknown"
)

// FailureCauses returns every failure cause.
func FailureCauses() []FailureCause {
	return []FailureCause{CauseWearOut, CauseHeat, CauseMoisture, CauseCorrosion, CauseContamination, CauseSupply, CauseOverload, CauseRegeneration, CauseInstallation, CauseUnknown}
}

// Valid reports whether c is known.
func (c FailureCause) Valid() bool { return slices.Contains(FailureCauses(), c) }
