package store

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"time"

	"gorm.io/gorm"

	"kelvard/health"
)

// ResourceInfo describes one register collection: its API name, which JSON
// fields a create and a PATCH accept, its list filters, how it is limited to
// sites and which tables refer to it. The api package builds routes and the
// OpenAPI document from it, so the lists live in one place.
type ResourceInfo struct {
	// Name is the collection's path segment and audit name ("drive-models").
	Name string
	// Table is the database table.
	Table string
	// Create lists the JSON fields a create accepts.
	Create []string
	// Patch lists the JSON fields a PATCH accepts.
	Patch []string
	// Filters lists the list endpoint's query filters.
	Filters []Filter
	// scope is an SQL condition with one ? for the principal's site ids, or
	// "" when the collection is shared by all sites.
	scope string
	// referencedBy lists the (table, column) pairs that block a delete.
	referencedBy [][2]string
}

// Filter is one list filter: a query parameter, the column it matches and
// the kind of value it takes.
type Filter struct {
	Param  string
	Column string
	Kind   FilterKind
	// Values lists the allowed values of an enumeration filter.
	Values []string
}

// FilterKind is the value type of a filter.
type FilterKind string

// Filter kinds: an integer id, exact text, an enumeration, and the lower
// (inclusive) and upper (exclusive) bounds of a time column.
const (
	FilterID   FilterKind = "id"
	FilterText FilterKind = "text"
	FilterEnum FilterKind = "enum"
	FilterFrom FilterKind = "from"
	FilterTo   FilterKind = "to"
)

// record is what every register model implements so the generic CRUD code
// can handle it.
type record interface {
	info() *ResourceInfo
	Key() int64
	// prepare normalises the record before validation: trims text, puts
	// times in UTC and fills derived fields.
	prepare(ctx context.Context, tx *gorm.DB) error
	validate(ctx context.Context, tx *gorm.DB) error
}

// creator is implemented by records that set defaults before a create body
// is applied, or write related rows after the insert.
type creator interface {
	defaults()
	afterCreate(ctx context.Context, tx *gorm.DB) error
}

// deleter is implemented by records that must check or tidy before a
// delete.
type deleter interface {
	beforeDelete(ctx context.Context, tx *gorm.DB) error
}

func enumStrings[T ~string](vs []T) []string {
	out := make([]string, len(vs))
	for i, v := range vs {
		out[i] = string(v)
	}
	return out
}

var (
	siteInfo = &ResourceInfo{
		Name: "sites", Table: "sites",
		Create:       []string{"name", "elevation_m", "time_zone", "ambient_min_c", "ambient_max_c", "parameters", "notes"},
		Patch:        []string{"name", "elevation_m", "time_zone", "ambient_min_c", "ambient_max_c", "parameters", "notes"},
		Filters:      []Filter{{Param: "name", Column: "name", Kind: FilterText}},
		scope:        "id IN ?",
		referencedBy: [][2]string{{"areas", "site_id"}, {"positions", "site_id"}, {"drives", "site_id"}, {"work_orders", "site_id"}},
	}
	areaInfo = &ResourceInfo{
		Name: "areas", Table: "areas",
		Create: []string{"site_id", "name", "environment", "parameters", "notes"},
		Patch:  []string{"name", "environment", "parameters", "notes"},
		Filters: []Filter{
			{Param: "site_id", Column: "site_id", Kind: FilterID},
			{Param: "name", Column: "name", Kind: FilterText},
			{Param: "location", Column: "env_location", Kind: FilterEnum, Values: enumStrings(health.Locations())},
			{Param: "corrosion", Column: "env_corrosion", Kind: FilterEnum, Values: enumStrings(health.Corrosions())},
		},
		scope:        "site_id IN ?",
		referencedBy: [][2]string{{"positions", "area_id"}, {"drives", "stores_area_id"}, {"work_orders", "area_id"}},
	}
	driveModelFields = []string{"name", "maker", "voltage_class_v", "supply_phases", "normal_duty_current_a", "normal_duty_power_kw",
		"heavy_duty_current_a", "heavy_duty_power_kw", "normal_overload_fraction", "heavy_overload_fraction", "overload_s",
		"rated_ambient_c", "ambient_derate_fraction_per_c", "max_ambient_c", "altitude_rating_m", "altitude_derate_fraction_per_100m",
		"max_altitude_m", "default_carrier_khz", "carrier_derate", "single_phase_fraction", "losses_fraction", "bus_trip_v",
		"capacitor", "fan", "enclosure", "conformal_coating", "drive_cost", "capacitor_kit_cost", "fan_kit_cost", "labour_cost_per_h",
		"drive_labour_h", "capacitor_labour_h", "fan_labour_h", "lead_time_days", "spares_on_hand", "parameters", "notes"}
	driveModelInfo = &ResourceInfo{
		Name: "drive-models", Table: "drive_models",
		Create: driveModelFields,
		Patch:  driveModelFields,
		Filters: []Filter{
			{Param: "name", Column: "name", Kind: FilterText},
			{Param: "maker", Column: "maker", Kind: FilterText},
		},
		referencedBy: [][2]string{{"drives", "model_id"}},
	}
	positionFields = []string{"tag", "description", "mounting", "cabinet", "supply_voltage_v", "supply_phases", "supply_frequency_hz",
		"single_phase_derate_set", "carrier_khz", "duty", "criticality", "notes"}
	positionInfo = &ResourceInfo{
		Name: "positions", Table: "positions",
		Create: append([]string{"area_id"}, positionFields...),
		Patch:  positionFields,
		Filters: []Filter{
			{Param: "site_id", Column: "site_id", Kind: FilterID},
			{Param: "area_id", Column: "area_id", Kind: FilterID},
			{Param: "tag", Column: "tag", Kind: FilterText},
			{Param: "criticality", Column: "criticality", Kind: FilterEnum, Values: enumStrings(health.Criticalities())},
			{Param: "mounting", Column: "mounting", Kind: FilterEnum, Values: enumStrings(health.Mountings())},
		},
		scope:        "site_id IN ?",
		referencedBy: [][2]string{{"installations", "position_id"}, {"events", "position_id"}, {"work_order_lines", "position_id"}},
	}
	driveInfo = &ResourceInfo{
		Name: "drives", Table: "drives",
		Create: []string{"serial", "model_id", "site_id", "status", "stores_area_id", "manufactured_at", "last_energised_at", "notes"},
		Patch:  []string{"serial", "model_id", "site_id", "status", "stores_area_id", "manufactured_at", "last_energised_at", "notes"},
		Filters: []Filter{
			{Param: "site_id", Column: "site_id", Kind: FilterID},
			{Param: "model_id", Column: "model_id", Kind: FilterID},
			{Param: "position_id", Column: "position_id", Kind: FilterID},
			{Param: "serial", Column: "serial", Kind: FilterText},
			{Param: "status", Column: "status", Kind: FilterEnum, Values: enumStrings(health.DriveStatuses())},
		},
		scope: "site_id IN ?",
		referencedBy: [][2]string{{"installations", "drive_id"}, {"events", "drive_id"}, {"readings", "drive_id"},
			{"work_order_lines", "drive_id"}, {"work_order_lines", "swap_drive_id"}},
	}
	componentInfo = &ResourceInfo{
		Name: "components", Table: "components",
		Create: []string{"kind", "part", "installed_at", "removed_at", "initial_capacitance_uf", "initial_esr_milliohm", "notes"},
		Patch:  []string{"part", "installed_at", "removed_at", "initial_capacitance_uf", "initial_esr_milliohm", "notes"},
		Filters: []Filter{
			{Param: "drive_id", Column: "drive_id", Kind: FilterID},
			{Param: "kind", Column: "kind", Kind: FilterEnum, Values: enumStrings(health.ComponentKinds())},
		},
		scope:        "drive_id IN (SELECT id FROM drives WHERE site_id IN ?)",
		referencedBy: [][2]string{{"work_order_lines", "new_component_id"}},
	}
	installationInfo = &ResourceInfo{
		Name: "installations", Table: "installations",
		Create: []string{"position_id", "at", "status", "notes"},
		Patch:  []string{"notes"},
		Filters: []Filter{
			{Param: "drive_id", Column: "drive_id", Kind: FilterID},
			{Param: "position_id", Column: "position_id", Kind: FilterID},
		},
		scope: "drive_id IN (SELECT id FROM drives WHERE site_id IN ?)",
	}
	eventInfo = &ResourceInfo{
		Name: "events", Table: "events",
		Create: []string{"drive_id", "position_id", "at", "type", "trip_cause", "state", "failure_mode", "failure_cause", "component", "notes"},
		Patch:  []string{"trip_cause", "state", "failure_mode", "failure_cause", "component", "notes"},
		Filters: []Filter{
			{Param: "drive_id", Column: "drive_id", Kind: FilterID},
			{Param: "position_id", Column: "position_id", Kind: FilterID},
			{Param: "type", Column: "type", Kind: FilterEnum, Values: enumStrings(health.EventTypes())},
			{Param: "from", Column: "at", Kind: FilterFrom},
			{Param: "to", Column: "at", Kind: FilterTo},
		},
		scope: "drive_id IN (SELECT id FROM drives WHERE site_id IN ?)",
	}
)

func (*Site) info() *ResourceInfo         { return siteInfo }
func (*Area) info() *ResourceInfo         { return areaInfo }
func (*DriveModel) info() *ResourceInfo   { return driveModelInfo }
func (*Position) info() *ResourceInfo     { return positionInfo }
func (*Drive) info() *ResourceInfo        { return driveInfo }
func (*Component) info() *ResourceInfo    { return componentInfo }
func (*Installation) info() *ResourceInfo { return installationInfo }
func (*Event) info() *ResourceInfo        { return eventInfo }

// Key returns the Site's id.
func (r *Site) Key() int64 { return r.ID }

// Key returns the Area's id.
func (r *Area) Key() int64 { return r.ID }

// Key returns the DriveModel's id.
func (r *DriveModel) Key() int64 { return r.ID }

// Key returns the Position's id.
func (r *Position) Key() int64 { return r.ID }

// Key returns the Drive's id.
func (r *Drive) Key() int64 { return r.ID }

// Key returns the Component's id.
func (r *Component) Key() int64 { return r.ID }

// Key returns the Installation's id.
func (r *Installation) Key() int64 { return r.ID }

// Key returns the Event's id.
func (r *Event) Key() int64 { return r.ID }

// ---- sites

func (r *Site) defaults() { r.TimeZone, r.Parameters = "UTC", Parameters{} }

func (r *Site) afterCreate(context.Context, *gorm.DB) error { return nil }

func (r *Site) prepare(context.Context, *gorm.DB) error {
	r.Name = strings.TrimSpace(r.Name)
	if r.Parameters == nil {
		r.Parameters = Parameters{}
	}
	r.TimeZone = strings.TrimSpace(r.TimeZone)
	return nil
}

func (r *Site) validate(context.Context, *gorm.DB) error {
	var fe fieldErrors
	fe.text("name", r.Name, true, 100)
	fe.rangeCheck("elevation_m", r.ElevationM, -500, 6000)
	if _, err := time.LoadLocation(r.TimeZone); err != nil || r.TimeZone == "" {
		fe.add("time_zone", "must be an IANA time zone such as UTC or Etc/GMT-3")
	}
	fe.rangeCheck("ambient_min_c", r.AmbientMinC, -60, 80)
	fe.rangeCheck("ambient_max_c", r.AmbientMaxC, -60, 80)
	if r.AmbientMaxC < r.AmbientMinC {
		fe.add("ambient_max_c", "must not be below ambient_min_c")
	}
	fe.parameters(r.Parameters)
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// ---- areas

func (r *Area) defaults() {
	r.Parameters = Parameters{}
	r.Environment = Environment{Location: health.Indoor, Sun: health.SunNone, AmbientMinC: 5, AmbientMaxC: 40,
		Water: health.WaterNone, Dust: health.DustNone, Oil: health.OilNone, Corrosion: health.CorrosionG1}
}

func (r *Area) afterCreate(context.Context, *gorm.DB) error { return nil }

func (r *Area) prepare(context.Context, *gorm.DB) error {
	r.Name = strings.TrimSpace(r.Name)
	if r.Parameters == nil {
		r.Parameters = Parameters{}
	}
	return nil
}

func (r *Area) validate(ctx context.Context, tx *gorm.DB) error {
	var fe fieldErrors
	refCheck(ctx, tx, &fe, "site_id", "sites", "id", r.SiteID)
	fe.text("name", r.Name, true, 100)
	fe.addMap("environment.", r.Environment.Health().Validate())
	fe.parameters(r.Parameters)
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// ---- drive models

func (r *DriveModel) defaults() {
	// Derating defaults are the models' own (health.DefaultRatings, which
	// names their sources). Capacitors default to 5000 h at 105 °C rated
	// with ripple and about 5 °C ripple self-heating (capacitor makers'
	// life formulas); the fan to L10 40 000 h at 60 °C halving every 10 °C
	// (common practice).
	d := health.DefaultRatings(0)
	carrier := make([]CarrierPoint, len(d.CarrierTable))
	for i, p := range d.CarrierTable {
		carrier[i] = CarrierPoint{CarrierKHz: p.KHz, Fraction: p.Factor}
	}
	*r = DriveModel{
		SupplyPhases: d.SupplyPhases, NormalOverload: d.NormalOverload.Fraction, HeavyOverload: d.HeavyOverload.Fraction,
		OverloadS:     d.NormalOverload.DurationS,
		RatedAmbientC: d.RatedAmbientC, AmbientDeratePerC: d.AmbientSlopePerC, MaxAmbientC: d.MaxAmbientC,
		AltitudeRatingM: d.AltitudeRatingM, AltitudeDeratePer100: d.AltitudeSlopePer100M, MaxAltitudeM: d.MaxAltitudeM,
		DefaultCarrierKHz: d.DefaultCarrierKHz, CarrierDerate: carrier, SinglePhaseFraction: d.SinglePhaseFactor,
		LossesFraction: d.LossFraction,
		Capacitor:      CapacitorSpec{RatedLifeH: 5000, RatedTempC: 105, RatingIncludesRipple: true, RippleRiseC: 5},
		Fan:            FanSpec{L10H: 40000, RefTempC: 60, HalvingInterval: 10, Runs: health.FanAlways},
		Parameters:     Parameters{},
	}
}

func (r *DriveModel) afterCreate(context.Context, *gorm.DB) error { return nil }

func (r *DriveModel) prepare(context.Context, *gorm.DB) error {
	r.Name = strings.TrimSpace(r.Name)
	r.Maker = strings.TrimSpace(r.Maker)
	if r.CarrierDerate == nil {
		r.CarrierDerate = []CarrierPoint{}
	}
	if r.Parameters == nil {
		r.Parameters = Parameters{}
	}
	if r.BusTripV == 0 && r.VoltageClassV > 0 {
		r.BusTripV = health.DefaultBusTripV(r.VoltageClassV)
	}
	return nil
}

func (r *DriveModel) validate(context.Context, *gorm.DB) error {
	var fe fieldErrors
	fe.text("name", r.Name, true, 100)
	fe.text("maker", r.Maker, false, 100)
	fe.rangeCheck("voltage_class_v", r.VoltageClassV, 100, 15000)
	if r.SupplyPhases != 1 && r.SupplyPhases != 3 {
		fe.add("supply_phases", "must be 1 or 3")
	}
	fe.rangeCheck("normal_duty_current_a", r.NormalDutyCurrentA, 0.1, 10000)
	fe.rangeCheck("normal_duty_power_kw", r.NormalDutyPowerKW, 0.01, 20000)
	fe.rangeCheck("heavy_duty_current_a", r.HeavyDutyCurrentA, 0.1, 10000)
	fe.rangeCheck("heavy_duty_power_kw", r.HeavyDutyPowerKW, 0.01, 20000)
	if r.HeavyDutyCurrentA > r.NormalDutyCurrentA {
		fe.add("heavy_duty_current_a", "must not exceed normal_duty_current_a")
	}
	fe.rangeCheck("normal_overload_fraction", r.NormalOverload, 1, 3)
	fe.rangeCheck("heavy_overload_fraction", r.HeavyOverload, 1, 3)
	fe.rangeCheck("overload_s", r.OverloadS, 1, 600)
	fe.rangeCheck("rated_ambient_c", r.RatedAmbientC, -20, 70)
	fe.rangeCheck("ambient_derate_fraction_per_c", r.AmbientDeratePerC, 0, 0.1)
	fe.rangeCheck("max_ambient_c", r.MaxAmbientC, r.RatedAmbientC, 80)
	fe.rangeCheck("altitude_rating_m", r.AltitudeRatingM, 0, 5000)
	fe.rangeCheck("altitude_derate_fraction_per_100m", r.AltitudeDeratePer100, 0, 0.1)
	fe.rangeCheck("max_altitude_m", r.MaxAltitudeM, r.AltitudeRatingM, 6000)
	fe.rangeCheck("default_carrier_khz", r.DefaultCarrierKHz, 0.5, 32)
	prev := CarrierPoint{CarrierKHz: r.DefaultCarrierKHz, Fraction: 1}
	for i, p := range r.CarrierDerate {
		f := fmt.Sprintf("carrier_derate[%d]", i)
		if !finite(p.CarrierKHz, p.Fraction) || p.CarrierKHz <= prev.CarrierKHz || p.CarrierKHz > 32 {
			fe.add(f+".carrier_khz", "must rise above the previous point and the default carrier, up to 32")
		}
		if !finite(p.Fraction) || p.Fraction <= 0 || p.Fraction > prev.Fraction {
			fe.add(f+".fraction", "must lie in (0, 1] and not rise with carrier")
		}
		prev = p
	}
	fe.rangeCheck("single_phase_fraction", r.SinglePhaseFraction, 0, 1)
	fe.rangeCheck("losses_fraction", r.LossesFraction, 0, 0.2)
	fe.rangeCheck("bus_trip_v", r.BusTripV, 1, 30000)
	fe.rangeCheck("capacitor.rated_life_h", r.Capacitor.RatedLifeH, 100, 1e6)
	fe.rangeCheck("capacitor.rated_temp_c", r.Capacitor.RatedTempC, 40, 150)
	fe.rangeCheck("capacitor.ripple_rise_c", r.Capacitor.RippleRiseC, 0, 30)
	if e := r.Capacitor.ActivationEnergyEV; e != 0 {
		fe.rangeCheck("capacitor.activation_energy_ev", e, 0.1, 2)
	}
	fe.rangeCheck("fan.l10_h", r.Fan.L10H, 100, 1e6)
	fe.rangeCheck("fan.ref_temp_c", r.Fan.RefTempC, -20, 120)
	fe.rangeCheck("fan.halving_interval_c", r.Fan.HalvingInterval, 1, 30)
	oneOf(&fe, "fan.runs", r.Fan.Runs, health.FanRunsValues())
	if _, err := r.Enclosure.Parse(); err != nil {
		fe.add("enclosure", "%v", err)
	}
	for _, c := range []struct {
		f string
		v float64
	}{{"drive_cost", r.DriveCost}, {"capacitor_kit_cost", r.CapacitorKitCost}, {"fan_kit_cost", r.FanKitCost},
		{"labour_cost_per_h", r.LabourCostPerH}, {"drive_labour_h", r.DriveLabourH}, {"capacitor_labour_h", r.CapacitorLabourH},
		{"fan_labour_h", r.FanLabourH}} {
		fe.rangeCheck(c.f, c.v, 0, 1e9)
	}
	fe.rangeCheck("lead_time_days", r.LeadTimeDays, 0, 3650)
	if r.SparesOnHand < 0 || r.SparesOnHand > 100000 {
		fe.add("spares_on_hand", "must lie between 0 and 100000")
	}
	fe.parameters(r.Parameters)
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// ---- positions

func (r *Position) defaults() {
	r.Mounting = health.MountingOwn
	r.SupplyPhases = 3
	r.SupplyFrequencyHz = 50
	r.CarrierKHz = 4
	r.Duty = health.DutyNormal
	r.Criticality = health.CriticalityB
}

func (r *Position) afterCreate(context.Context, *gorm.DB) error { return nil }

func (r *Position) prepare(ctx context.Context, tx *gorm.DB) error {
	r.Tag = strings.TrimSpace(r.Tag)
	if r.AreaID > 0 {
		var a Area
		if err := tx.Select("site_id").Where("id = ?", r.AreaID).Take(&a).Error; err == nil {
			r.SiteID = a.SiteID
		} else if !errNoRows(err) {
			return fmt.Errorf("look up area %d: %w", r.AreaID, err)
		}
	}
	return nil
}

func (r *Position) validate(ctx context.Context, tx *gorm.DB) error {
	var fe fieldErrors
	refCheck(ctx, tx, &fe, "area_id", "areas", "site_id", r.AreaID)
	fe.text("tag", r.Tag, true, 64)
	fe.text("description", r.Description, false, 400)
	oneOf(&fe, "mounting", r.Mounting, health.Mountings())
	c := r.Cabinet
	switch r.Mounting {
	case health.MountingCabinet:
		if _, err := health.ParseEnclosure(c.NEMAType, c.IPCode); err != nil {
			fe.add("cabinet.nema_type", "%v", err)
		}
		oneOf(&fe, "cabinet.cooling", c.Cooling, health.Coolings())
		oneOf(&fe, "cabinet.material", c.Material, health.Materials())
		fe.rangeCheck("cabinet.absorptance_fraction", c.AbsorptanceFraction, 0, 1)
		fe.rangeCheck("cabinet.height_m", c.HeightM, 0, 5)
		fe.rangeCheck("cabinet.width_m", c.WidthM, 0, 20)
		fe.rangeCheck("cabinet.depth_m", c.DepthM, 0, 5)
		fe.rangeCheck("cabinet.surface_area_m2", c.SurfaceAreaM2, 0, 200)
		if c.SurfaceAreaM2 == 0 {
			if c.HeightM <= 0 || c.WidthM <= 0 || c.DepthM <= 0 {
				fe.add("cabinet.surface_area_m2", "give surface_area_m2 or all of height_m, width_m and depth_m")
			}
			oneOf(&fe, "cabinet.placement", c.Placement, health.CabinetPlacements())
		} else if c.Placement != "" {
			oneOf(&fe, "cabinet.placement", c.Placement, health.CabinetPlacements())
		}
		fe.rangeCheck("cabinet.airflow_m3_per_h", c.AirflowM3PerH, 0, 100000)
		if c.Cooling == health.CoolingFanVentilated && c.AirflowM3PerH <= 0 {
			fe.add("cabinet.airflow_m3_per_h", "is required for a fan-ventilated cabinet")
		}
		fe.rangeCheck("cabinet.cooling_capacity_w", c.CoolingCapacityW, 0, 1e6)
		fe.rangeCheck("cabinet.set_point_c", c.SetPointC, 0, 60)
		if c.Cooling == health.CoolingAirConditioned && (c.CoolingCapacityW <= 0 || c.SetPointC <= 0) {
			fe.add("cabinet.cooling_capacity_w", "an air-conditioned cabinet needs cooling_capacity_w and set_point_c")
		}
		fe.rangeCheck("cabinet.other_losses_w", c.OtherLossesW, 0, 1e6)
	case health.MountingOwn:
		if c != (Cabinet{}) {
			fe.add("cabinet", "must be empty when mounting is own_enclosure")
		}
	}
	fe.rangeCheck("supply_voltage_v", r.SupplyVoltageV, 100, 15000)
	if r.SupplyPhases != 1 && r.SupplyPhases != 3 {
		fe.add("supply_phases", "must be 1 or 3")
	}
	fe.rangeCheck("supply_frequency_hz", r.SupplyFrequencyHz, 45, 65)
	fe.rangeCheck("carrier_khz", r.CarrierKHz, 0.5, 32)
	oneOf(&fe, "duty", r.Duty, health.Duties())
	oneOf(&fe, "criticality", r.Criticality, health.Criticalities())
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// ---- drives

func (r *Drive) defaults() { r.Status = health.StatusInStores }

// afterCreate gives a new drive its wearing parts, a DC-bus capacitor bank
// and a cooling fan, fitted when the drive was made.
func (r *Drive) afterCreate(ctx context.Context, tx *gorm.DB) error {
	for _, k := range health.ComponentKinds() {
		c := Component{DriveID: r.ID, Kind: k, InstalledAt: r.ManufacturedAt}
		if err := tx.Create(&c).Error; err != nil {
			return fmt.Errorf("fit %s to drive %d: %w", k, r.ID, err)
		}
	}
	return nil
}

func (r *Drive) prepare(context.Context, *gorm.DB) error {
	r.Serial = strings.TrimSpace(r.Serial)
	r.ManufacturedAt = utc(r.ManufacturedAt)
	r.LastEnergisedAt = utcPtr(r.LastEnergisedAt)
	return nil
}

func (r *Drive) validate(ctx context.Context, tx *gorm.DB) error {
	var fe fieldErrors
	fe.text("serial", r.Serial, true, 64)
	refCheck(ctx, tx, &fe, "model_id", "drive_models", "", r.ModelID)
	refCheck(ctx, tx, &fe, "site_id", "sites", "id", r.SiteID)
	oneOf(&fe, "status", r.Status, health.DriveStatuses())
	if r.PositionID == nil && r.Status == health.StatusInstalled {
		fe.add("status", "a drive becomes installed only by an installation (POST /api/v1/drives/{id}/installations)")
	}
	if r.PositionID != nil && r.Status != health.StatusInstalled {
		fe.add("status", "the drive stands at position %d: remove it first (POST /api/v1/drives/{id}/installations with position_id null)", *r.PositionID)
	}
	if r.PositionID != nil {
		var p Position
		if err := tx.Select("site_id").Where("id = ?", *r.PositionID).Take(&p).Error; err == nil && p.SiteID != r.SiteID {
			fe.add("site_id", "the drive stands at position %d of site %d: a drive changes site while installed only by a move", *r.PositionID, p.SiteID)
		}
	}
	if r.StoresAreaID != nil {
		refCheck(ctx, tx, &fe, "stores_area_id", "areas", "site_id", *r.StoresAreaID)
		var a Area
		if err := tx.Select("site_id").Where("id = ?", *r.StoresAreaID).Take(&a).Error; err == nil && a.SiteID != r.SiteID {
			fe.add("stores_area_id", "area %d is not at site %d", *r.StoresAreaID, r.SiteID)
		}
	}
	now := tx.NowFunc()
	if r.ManufacturedAt.IsZero() {
		fe.add("manufactured_at", "is required")
	} else if r.ManufacturedAt.After(now.Add(24 * time.Hour)) {
		fe.add("manufactured_at", "must not lie in the future")
	}
	if e := r.LastEnergisedAt; e != nil && (e.Before(r.ManufacturedAt) || e.After(now.Add(5*time.Minute))) {
		fe.add("last_energised_at", "must lie between manufactured_at and now")
	}
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// ---- components

func (r *Component) defaults() {}

func (r *Component) afterCreate(context.Context, *gorm.DB) error { return nil }

func (r *Component) prepare(context.Context, *gorm.DB) error {
	r.InstalledAt = utc(r.InstalledAt)
	r.RemovedAt = utcPtr(r.RemovedAt)
	return nil
}

func (r *Component) validate(ctx context.Context, tx *gorm.DB) error {
	var fe fieldErrors
	refCheck(ctx, tx, &fe, "drive_id", "drives", "site_id", r.DriveID)
	oneOf(&fe, "kind", r.Kind, health.ComponentKinds())
	fe.text("part", r.Part, false, 100)
	if r.InstalledAt.IsZero() {
		fe.add("installed_at", "is required")
	} else if r.InstalledAt.After(tx.NowFunc().Add(5 * time.Minute)) {
		fe.add("installed_at", "must not lie in the future")
	}
	if r.RemovedAt != nil && r.RemovedAt.Before(r.InstalledAt) {
		fe.add("removed_at", "must not be before installed_at")
	}
	fe.rangeCheck("initial_capacitance_uf", r.InitialCapacitanceUF, 0, 1e7)
	fe.rangeCheck("initial_esr_milliohm", r.InitialESRMilliohm, 0, 1e5)
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// ---- installations (created through Store.MoveDrive, see moves.go)

func (r *Installation) prepare(context.Context, *gorm.DB) error { return nil }

func (r *Installation) validate(_ context.Context, _ *gorm.DB) error {
	var fe fieldErrors
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// ---- events

func (r *Event) defaults() {}

func (r *Event) afterCreate(context.Context, *gorm.DB) error { return nil }

// prepare puts the time in UTC and, when the event names only a position,
// attributes it to the drive installed there at that time.
func (r *Event) prepare(ctx context.Context, tx *gorm.DB) error {
	r.At = utc(r.At)
	if r.DriveID == 0 && r.PositionID != nil && !r.At.IsZero() {
		var in Installation
		err := tx.Where("position_id = ? AND installed_at <= ? AND (removed_at IS NULL OR removed_at > ?)", *r.PositionID, r.At, r.At).
			Take(&in).Error
		if err == nil {
			r.DriveID = in.DriveID
		} else if !errNoRows(err) {
			return fmt.Errorf("find the drive at position %d: %w", *r.PositionID, err)
		}
	}
	return nil
}

func (r *Event) validate(ctx context.Context, tx *gorm.DB) error {
	var fe fieldErrors
	if r.DriveID == 0 && r.PositionID != nil {
		fe.add("position_id", "no drive stood at position %d at %s", *r.PositionID, r.At.Format(time.RFC3339))
	} else {
		refCheck(ctx, tx, &fe, "drive_id", "drives", "site_id", r.DriveID)
	}
	if r.PositionID != nil {
		refCheck(ctx, tx, &fe, "position_id", "positions", "site_id", *r.PositionID)
	}
	if r.At.IsZero() {
		fe.add("at", "is required")
	} else if r.At.After(tx.NowFunc().Add(5 * time.Minute)) {
		fe.add("at", "must not lie more than 5 minutes in the future")
	}
	oneOf(&fe, "type", r.Type, health.EventTypes())
	if r.Type == health.EventTrip {
		oneOf(&fe, "trip_cause", r.TripCause, health.TripCauses())
	} else if r.TripCause != "" {
		fe.add("trip_cause", "is only for trips")
	}
	if !r.State.Valid() {
		fe.add("state", "must be one of %v", health.OperatingStates())
	}
	if r.Type == health.EventFailure {
		oneOf(&fe, "failure_mode", r.FailureMode, health.FailureModes())
		if r.FailureCause == "" {
			r.FailureCause = health.CauseUnknown
		}
		oneOf(&fe, "failure_cause", r.FailureCause, health.FailureCauses())
	} else if r.FailureMode != "" || r.FailureCause != "" {
		fe.add("failure_mode", "failure_mode and failure_cause are only for failures")
	}
	if r.Type == health.EventComponentReplaced {
		oneOf(&fe, "component", r.Component, health.ComponentKinds())
	} else if r.Component != "" {
		fe.add("component", "is only for component replacements")
	}
	fe.text("notes", r.Notes, false, 4000)
	return fe.err()
}

// hasField reports whether name is one of fields.
func hasField(fields []string, name string) bool { return slices.Contains(fields, name) }
