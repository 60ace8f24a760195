package store

import (
	"context"
	"math"
	"strings"
	"time"

	"gorm.io/gorm"

	"kelvard/health"
)

// This file holds the register's models: what the API reads and writes and
// what the database stores. JSON names carry their SI unit (DESIGN.md
// section 5).

// Site is a plant or a utility's works: the place that sets elevation and
// the design climate.
type Site struct {
	ID          int64   `json:"id" gorm:"primaryKey"`
	Name        string  `json:"name"`
	ElevationM  float64 `json:"elevation_m"`
	TimeZone    string  `json:"time_zone"`
	AmbientMinC float64 `json:"ambient_min_c"`
	AmbientMaxC float64 `json:"ambient_max_c"`
	// Parameters overrides model parameters for the whole site.
	Parameters Parameters `json:"parameters" gorm:"serializer:json"`
	Notes      string     `json:"notes"`
	CreatedAt  time.Time  `json:"created_at"`
	UpdatedAt  time.Time  `json:"updated_at"`
}

// Area is a part of a site with one environment: a pump hall, a dosing
// room, an outdoor platform.
type Area struct {
	ID          int64       `json:"id" gorm:"primaryKey"`
	SiteID      int64       `json:"site_id"`
	Name        string      `json:"name"`
	Environment Environment `json:"environment" gorm:"embedded;embeddedPrefix:env_"`
	// Parameters overrides model parameters for the area.
	Parameters Parameters `json:"parameters" gorm:"serializer:json"`
	Notes      string     `json:"notes"`
	CreatedAt  time.Time  `json:"created_at"`
	UpdatedAt  time.Time  `json:"updated_at"`
}

// Environment is the stored form of health.Environment.
type Environment struct {
	Location            health.Location  `json:"location"`
	Sun                 health.Sun       `json:"sun"`
	AmbientMinC         float64          `json:"ambient_min_c"`
	AmbientMaxC         float64          `json:"ambient_max_c"`
	Water               health.Water     `json:"water"`
	Dust                health.Dust      `json:"dust"`
	Oil                 health.Oil       `json:"oil"`
	Condensation        bool             `json:"condensation"`
	SaltAir             bool             `json:"salt_air"`
	Corrosion           health.Corrosion `json:"corrosion"`
	HazardousClassified bool             `json:"hazardous_classified"`
}

// Health converts the stored profile to the models' type.
func (e Environment) Health() health.Environment {
	return health.Environment{
		Location: e.Location, Sun: e.Sun, AmbientMinC: e.AmbientMinC, AmbientMaxC: e.AmbientMaxC,
		Water: e.Water, Dust: e.Dust, Oil: e.Oil, Condensation: e.Condensation, SaltAir: e.SaltAir,
		Corrosion: e.Corrosion, HazardousClass: e.HazardousClassified,
	}
}

// DriveModel is a drive type as its maker rates it: currents, derating
// rules, capacitor and fan life, enclosure as supplied, costs and spares.
type DriveModel struct {
	ID                   int64   `json:"id" gorm:"primaryKey"`
	Name                 string  `json:"name"`
	Maker                string  `json:"maker"`
	VoltageClassV        float64 `json:"voltage_class_v"`
	SupplyPhases         int     `json:"supply_phases"`
	NormalDutyCurrentA   float64 `json:"normal_duty_current_a"`
	NormalDutyPowerKW    float64 `json:"normal_duty_power_kw"`
	HeavyDutyCurrentA    float64 `json:"heavy_duty_current_a"`
	HeavyDutyPowerKW     float64 `json:"heavy_duty_power_kw"`
	NormalOverload       float64 `json:"normal_overload_fraction" gorm:"column:normal_overload_fraction"`
	HeavyOverload        float64 `json:"heavy_overload_fraction" gorm:"column:heavy_overload_fraction"`
	OverloadS            float64 `json:"overload_s"`
	RatedAmbientC        float64 `json:"rated_ambient_c"`
	AmbientDeratePerC    float64 `json:"ambient_derate_fraction_per_c" gorm:"column:ambient_derate_fraction_per_c"`
	MaxAmbientC          float64 `json:"max_ambient_c"`
	AltitudeRatingM      float64 `json:"altitude_rating_m"`
	AltitudeDeratePer100 float64 `json:"altitude_derate_fraction_per_100m" gorm:"column:altitude_derate_fraction_per_100m"`
	MaxAltitudeM         float64 `json:"max_altitude_m"`
	DefaultCarrierKHz    float64 `json:"default_carrier_khz" gorm:"column:default_carrier_khz"`
	// CarrierDerate lists (carrier, fraction) points; the fraction is 1 at
	// and below the default carrier and interpolated linearly between points.
	CarrierDerate       []CarrierPoint `json:"carrier_derate" gorm:"serializer:json"`
	SinglePhaseFraction float64        `json:"single_phase_fraction"`
	LossesFraction      float64        `json:"losses_fraction"`
	BusTripV            float64        `json:"bus_trip_v"`
	Capacitor           CapacitorSpec  `json:"capacitor" gorm:"embedded;embeddedPrefix:cap_"`
	Fan                 FanSpec        `json:"fan" gorm:"embedded;embeddedPrefix:fan_"`
	Enclosure           EnclosureSpec  `json:"enclosure" gorm:"embedded;embeddedPrefix:enclosure_"`
	ConformalCoating    bool           `json:"conformal_coating"`
	DriveCost           float64        `json:"drive_cost"`
	CapacitorKitCost    float64        `json:"capacitor_kit_cost"`
	FanKitCost          float64        `json:"fan_kit_cost"`
	LabourCostPerH      float64        `json:"labour_cost_per_h" gorm:"column:labour_cost_per_h"`
	DriveLabourH        float64        `json:"drive_labour_h"`
	CapacitorLabourH    float64        `json:"capacitor_labour_h"`
	FanLabourH          float64        `json:"fan_labour_h"`
	LeadTimeDays        float64        `json:"lead_time_days"`
	SparesOnHand        int            `json:"spares_on_hand"`
	// Parameters overrides model parameters for drives of this model.
	Parameters Parameters `json:"parameters" gorm:"serializer:json"`
	Notes      string     `json:"notes"`
	CreatedAt  time.Time  `json:"created_at"`
	UpdatedAt  time.Time  `json:"updated_at"`
}

// CarrierPoint is one point of a carrier-frequency derating table.
type CarrierPoint struct {
	CarrierKHz float64 `json:"carrier_khz"`
	Fraction   float64 `json:"fraction"`
}

// CapacitorSpec is the DC-bus capacitor bank's rated life.
type CapacitorSpec struct {
	RatedLifeH           float64 `json:"rated_life_h"`
	RatedTempC           float64 `json:"rated_temp_c"`
	RatingIncludesRipple bool    `json:"rating_includes_ripple"`
	RippleRiseC          float64 `json:"ripple_rise_c"`
	ActivationEnergyEV   float64 `json:"activation_energy_ev" gorm:"column:activation_energy_ev"`
}

// FanSpec is the cooling fan's rated life.
type FanSpec struct {
	L10H            float64        `json:"l10_h" gorm:"column:l10_h"`
	RefTempC        float64        `json:"ref_temp_c"`
	HalvingInterval float64        `json:"halving_interval_c" gorm:"column:halving_interval_c"`
	Runs            health.FanRuns `json:"runs"`
}

// EnclosureSpec is an enclosure rating as registered: a NEMA 250 Type, an
// IEC 60529 IP code (dual codes such as "IP66/IP67" allowed), or both.
type EnclosureSpec struct {
	NEMAType string `json:"nema_type" gorm:"column:nema_type"`
	IPCode   string `json:"ip_code" gorm:"column:ip_code"`
}

// Parse returns the enclosure in the models' type.
func (e EnclosureSpec) Parse() (health.Enclosure, error) {
	return health.ParseEnclosure(e.NEMAType, e.IPCode)
}

// Position is a tagged place in an area where a drive is installed, with
// its mounting, cabinet, supply and parameter settings.
type Position struct {
	ID                   int64              `json:"id" gorm:"primaryKey"`
	SiteID               int64              `json:"site_id"`
	AreaID               int64              `json:"area_id"`
	Tag                  string             `json:"tag"`
	Description          string             `json:"description"`
	Mounting             health.Mounting    `json:"mounting"`
	Cabinet              Cabinet            `json:"cabinet" gorm:"embedded;embeddedPrefix:cab_"`
	SupplyVoltageV       float64            `json:"supply_voltage_v"`
	SupplyPhases         int                `json:"supply_phases"`
	SupplyFrequencyHz    float64            `json:"supply_frequency_hz"`
	SinglePhaseDerateSet bool               `json:"single_phase_derate_set"`
	CarrierKHz           float64            `json:"carrier_khz" gorm:"column:carrier_khz"`
	Duty                 health.Duty        `json:"duty"`
	Criticality          health.Criticality `json:"criticality"`
	Notes                string             `json:"notes"`
	CreatedAt            time.Time          `json:"created_at"`
	UpdatedAt            time.Time          `json:"updated_at"`
}

// Cabinet describes the cabinet a drive is mounted in; it is empty when the
// drive stands in its own enclosure.
type Cabinet struct {
	NEMAType            string                  `json:"nema_type" gorm:"column:nema_type"`
	IPCode              string                  `json:"ip_code" gorm:"column:ip_code"`
	Cooling             health.Cooling          `json:"cooling"`
	Material            health.Material         `json:"material"`
	AbsorptanceFraction float64                 `json:"absorptance_fraction"`
	HeightM             float64                 `json:"height_m"`
	WidthM              float64                 `json:"width_m"`
	DepthM              float64                 `json:"depth_m"`
	Placement           health.CabinetPlacement `json:"placement"`
	TopCovered          bool                    `json:"top_covered"`
	SurfaceAreaM2       float64                 `json:"surface_area_m2" gorm:"column:surface_area_m2"`
	AirflowM3PerH       float64                 `json:"airflow_m3_per_h" gorm:"column:airflow_m3_per_h"`
	CoolingCapacityW    float64                 `json:"cooling_capacity_w"`
	SetPointC           float64                 `json:"set_point_c"`
	OtherLossesW        float64                 `json:"other_losses_w"`
}

// Drive is a physical unit with a serial number. Where it stands is kept in
// its installation history; PositionID is the position it stands in now.
type Drive struct {
	ID              int64              `json:"id" gorm:"primaryKey"`
	Serial          string             `json:"serial"`
	ModelID         int64              `json:"model_id"`
	SiteID          int64              `json:"site_id"`
	Status          health.DriveStatus `json:"status"`
	PositionID      *int64             `json:"position_id"`
	StoresAreaID    *int64             `json:"stores_area_id"`
	ManufacturedAt  time.Time          `json:"manufactured_at"`
	LastEnergisedAt *time.Time         `json:"last_energised_at"`
	Notes           string             `json:"notes"`
	CreatedAt       time.Time          `json:"created_at"`
	UpdatedAt       time.Time          `json:"updated_at"`
}

// Component is a wearing part of a drive (the DC-bus capacitor bank, a
// cooling fan). A replacement closes one component (RemovedAt) and opens a
// new one, which restarts that part's life.
type Component struct {
	ID                   int64                `json:"id" gorm:"primaryKey"`
	DriveID              int64                `json:"drive_id"`
	Kind                 health.ComponentKind `json:"kind"`
	Part                 string               `json:"part"`
	InstalledAt          time.Time            `json:"installed_at"`
	RemovedAt            *time.Time           `json:"removed_at"`
	InitialCapacitanceUF float64              `json:"initial_capacitance_uf" gorm:"column:initial_capacitance_uf"`
	InitialESRMilliohm   float64              `json:"initial_esr_milliohm" gorm:"column:initial_esr_milliohm"`
	Notes                string               `json:"notes"`
	CreatedAt            time.Time            `json:"created_at"`
	UpdatedAt            time.Time            `json:"updated_at"`
}

// Installation is one stay of a drive at a position, from InstalledAt until
// RemovedAt (nil while it stands there).
type Installation struct {
	ID          int64      `json:"id" gorm:"primaryKey"`
	DriveID     int64      `json:"drive_id"`
	PositionID  int64      `json:"position_id"`
	InstalledAt time.Time  `json:"installed_at"`
	RemovedAt   *time.Time `json:"removed_at"`
	Notes       string     `json:"notes"`
	CreatedAt   time.Time  `json:"created_at"`
	UpdatedAt   time.Time  `json:"updated_at"`
}

// Event is something that happened to a drive: a trip, a power-up or
// power-down, a component replacement, a failure.
type Event struct {
	ID           int64                 `json:"id" gorm:"primaryKey"`
	DriveID      int64                 `json:"drive_id"`
	PositionID   *int64                `json:"position_id"`
	At           time.Time             `json:"at"`
	Type         health.EventType      `json:"type"`
	TripCause    health.TripCause      `json:"trip_cause"`
	State        health.OperatingState `json:"state"`
	FailureMode  health.FailureMode    `json:"failure_mode"`
	FailureCause health.FailureCause   `json:"failure_cause"`
	Component    health.ComponentKind  `json:"component"`
	Notes        string                `json:"notes"`
	CreatedAt    time.Time             `json:"created_at"`
	UpdatedAt    time.Time             `json:"updated_at"`
}

// finite reports whether every value is a finite number.
func finite(vs ...float64) bool {
	for _, v := range vs {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}

// rangeCheck adds an error when v lies outside [lo, hi].
func (fe *fieldErrors) rangeCheck(field string, v, lo, hi float64) {
	if !finite(v) || v < lo || v > hi {
		fe.add(field, "must lie between %g and %g", lo, hi)
	}
}

// required adds an error when s is blank or longer than max characters.
func (fe *fieldErrors) text(field, s string, required bool, max int) {
	switch {
	case required && strings.TrimSpace(s) == "":
		fe.add(field, "is required")
	case len(s) > max:
		fe.add(field, "must be at most %d characters", max)
	}
}

// oneOf adds an error when ok is false, listing the allowed values.
func oneOf[T ~string](fe *fieldErrors, field string, v T, all []T) {
	for _, a := range all {
		if v == a {
			return
		}
	}
	fe.add(field, "must be one of %v", all)
}

// refCheck adds an error when the row id does not exist in table or lies
// outside the principal's sites. siteCol names the table's site column
// ("" when the table has no site, "id" for sites).
func refCheck(ctx context.Context, tx *gorm.DB, fe *fieldErrors, field, table, siteCol string, id int64) {
	if id <= 0 {
		fe.add(field, "is required")
		return
	}
	q := tx.Table(table).Where("id = ?", id)
	if p := PrincipalFrom(ctx); !p.AllSites() && siteCol != "" {
		q = q.Where(siteCol+" IN ?", p.Sites)
	}
	var n int64
	if err := q.Count(&n).Error; err != nil || n == 0 {
		fe.add(field, "no %s with id %d", strings.TrimSuffix(strings.ReplaceAll(table, "_", " "), "s"), id)
	}
}

// utc normalises a time to UTC at the microsecond precision both stores keep.
func utc(t time.Time) time.Time { return t.UTC().Truncate(time.Microsecond) }

// utcPtr normalises an optional time.
func utcPtr(t *time.Time) *time.Time {
	if t == nil {
		return nil
	}
	u := utc(*t)
	return &u
}
