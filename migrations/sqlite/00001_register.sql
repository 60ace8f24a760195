-- +goose Up
-- The register: sites, areas with their environment, drive models, positions
-- (places), drives (physical units), their components, installation history,
-- events, API tokens and the audit log.

CREATE TABLE sites (
    id            INTEGER PRIMARY KEY AUTOINCREMENT,
    name          text NOT NULL UNIQUE,
    elevation_m   REAL NOT NULL DEFAULT 0,
    time_zone     text NOT NULL DEFAULT 'UTC',
    ambient_min_c REAL NOT NULL,
    ambient_max_c REAL NOT NULL,
    notes         text NOT NULL DEFAULT '',
    created_at    DATETIME NOT NULL,
    updated_at    DATETIME NOT NULL
);

CREATE TABLE areas (
    id                       INTEGER PRIMARY KEY AUTOINCREMENT,
    site_id                  INTEGER NOT NULL REFERENCES sites (id),
    name                     text NOT NULL,
    env_location             text NOT NULL,
    env_sun                  text NOT NULL,
    env_ambient_min_c        REAL NOT NULL,
    env_ambient_max_c        REAL NOT NULL,
    env_water                text NOT NULL,
    env_dust                 text NOT NULL,
    env_oil                  text NOT NULL,
    env_condensation         boolean NOT NULL,
    env_salt_air             boolean NOT NULL,
    env_corrosion            text NOT NULL,
    env_hazardous_classified boolean NOT NULL,
    notes                    text NOT NULL DEFAULT '',
    created_at               DATETIME NOT NULL,
    updated_at               DATETIME NOT NULL,
    UNIQUE (site_id, name)
);

CREATE TABLE drive_models (
    id                                 INTEGER PRIMARY KEY AUTOINCREMENT,
    name                               text NOT NULL UNIQUE,
    maker                              text NOT NULL DEFAULT '',
    voltage_class_v                    REAL NOT NULL,
    supply_phases                      integer NOT NULL,
    normal_duty_current_a              REAL NOT NULL,
    normal_duty_power_kw               REAL NOT NULL,
    heavy_duty_current_a               REAL NOT NULL,
    heavy_duty_power_kw                REAL NOT NULL,
    normal_overload_fraction           REAL NOT NULL,
    heavy_overload_fraction            REAL NOT NULL,
    overload_s                         REAL NOT NULL,
    rated_ambient_c                    REAL NOT NULL,
    ambient_derate_fraction_per_c      REAL NOT NULL,
    max_ambient_c                      REAL NOT NULL,
    altitude_rating_m                  REAL NOT NULL,
    altitude_derate_fraction_per_100m  REAL NOT NULL,
    max_altitude_m                     REAL NOT NULL,
    default_carrier_khz                REAL NOT NULL,
    carrier_derate                     TEXT NOT NULL DEFAULT '[]',
    single_phase_fraction              REAL NOT NULL,
    losses_fraction                    REAL NOT NULL,
    bus_trip_v                         REAL NOT NULL,
    cap_rated_life_h                   REAL NOT NULL,
    cap_rated_temp_c                   REAL NOT NULL,
    cap_rating_includes_ripple         boolean NOT NULL,
    cap_ripple_rise_c                  REAL NOT NULL,
    cap_activation_energy_ev           REAL NOT NULL DEFAULT 0,
    fan_l10_h                          REAL NOT NULL,
    fan_ref_temp_c                     REAL NOT NULL,
    fan_halving_interval_c             REAL NOT NULL,
    fan_runs                           text NOT NULL,
    enclosure_nema_type                text NOT NULL DEFAULT '',
    enclosure_ip_code                  text NOT NULL DEFAULT '',
    conformal_coating                  boolean NOT NULL,
    drive_cost                         REAL NOT NULL DEFAULT 0,
    capacitor_kit_cost                 REAL NOT NULL DEFAULT 0,
    fan_kit_cost                       REAL NOT NULL DEFAULT 0,
    labour_cost_per_h                  REAL NOT NULL DEFAULT 0,
    drive_labour_h                     REAL NOT NULL DEFAULT 0,
    capacitor_labour_h                 REAL NOT NULL DEFAULT 0,
    fan_labour_h                       REAL NOT NULL DEFAULT 0,
    lead_time_days                     REAL NOT NULL DEFAULT 0,
    spares_on_hand                     integer NOT NULL DEFAULT 0,
    notes                              text NOT NULL DEFAULT '',
    created_at                         DATETIME NOT NULL,
    updated_at                         DATETIME NOT NULL
);

CREATE TABLE positions (
    id                        INTEGER PRIMARY KEY AUTOINCREMENT,
    site_id                   INTEGER NOT NULL REFERENCES sites (id),
    area_id                   INTEGER NOT NULL REFERENCES areas (id),
    tag                       text NOT NULL,
    description               text NOT NULL DEFAULT '',
    mounting                  text NOT NULL,
    cab_nema_type             text NOT NULL DEFAULT '',
    cab_ip_code               text NOT NULL DEFAULT '',
    cab_cooling               text NOT NULL DEFAULT '',
    cab_material              text NOT NULL DEFAULT '',
    cab_absorptance_fraction  REAL NOT NULL DEFAULT 0,
    cab_height_m              REAL NOT NULL DEFAULT 0,
    cab_width_m               REAL NOT NULL DEFAULT 0,
    cab_depth_m               REAL NOT NULL DEFAULT 0,
    cab_placement             text NOT NULL DEFAULT '',
    cab_top_covered           boolean NOT NULL DEFAULT false,
    cab_surface_area_m2       REAL NOT NULL DEFAULT 0,
    cab_airflow_m3_per_h      REAL NOT NULL DEFAULT 0,
    cab_cooling_capacity_w    REAL NOT NULL DEFAULT 0,
    cab_set_point_c           REAL NOT NULL DEFAULT 0,
    cab_other_losses_w        REAL NOT NULL DEFAULT 0,
    supply_voltage_v          REAL NOT NULL,
    supply_phases             integer NOT NULL,
    supply_frequency_hz       REAL NOT NULL,
    single_phase_derate_set   boolean NOT NULL DEFAULT false,
    carrier_khz               REAL NOT NULL,
    duty                      text NOT NULL,
    criticality               text NOT NULL,
    notes                     text NOT NULL DEFAULT '',
    created_at                DATETIME NOT NULL,
    updated_at                DATETIME NOT NULL,
    UNIQUE (site_id, tag)
);
CREATE INDEX positions_area ON positions (area_id);

CREATE TABLE drives (
    id                 INTEGER PRIMARY KEY AUTOINCREMENT,
    serial             text NOT NULL UNIQUE,
    model_id           INTEGER NOT NULL REFERENCES drive_models (id),
    site_id            INTEGER NOT NULL REFERENCES sites (id),
    status             text NOT NULL,
    position_id        INTEGER UNIQUE REFERENCES positions (id),
    stores_area_id     INTEGER REFERENCES areas (id),
    manufactured_at    DATETIME NOT NULL,
    last_energised_at  DATETIME,
    notes              text NOT NULL DEFAULT '',
    created_at         DATETIME NOT NULL,
    updated_at         DATETIME NOT NULL
);
CREATE INDEX drives_site ON drives (site_id);
CREATE INDEX drives_model ON drives (model_id);

CREATE TABLE components (
    id                      INTEGER PRIMARY KEY AUTOINCREMENT,
    drive_id                INTEGER NOT NULL REFERENCES drives (id) ON DELETE CASCADE,
    kind                    text NOT NULL,
    part                    text NOT NULL DEFAULT '',
    installed_at            DATETIME NOT NULL,
    removed_at              DATETIME,
    initial_capacitance_uf  REAL NOT NULL DEFAULT 0,
    initial_esr_milliohm    REAL NOT NULL DEFAULT 0,
    notes                   text NOT NULL DEFAULT '',
    created_at              DATETIME NOT NULL,
    updated_at              DATETIME NOT NULL
);
CREATE INDEX components_drive ON components (drive_id, kind);

CREATE TABLE installations (
    id            INTEGER PRIMARY KEY AUTOINCREMENT,
    drive_id      INTEGER NOT NULL REFERENCES drives (id),
    position_id   INTEGER NOT NULL REFERENCES positions (id),
    installed_at  DATETIME NOT NULL,
    removed_at    DATETIME,
    notes         text NOT NULL DEFAULT '',
    created_at    DATETIME NOT NULL,
    updated_at    DATETIME NOT NULL
);
CREATE INDEX installations_drive ON installations (drive_id, installed_at);
CREATE INDEX installations_position ON installations (position_id, installed_at);

CREATE TABLE events (
    id             INTEGER PRIMARY KEY AUTOINCREMENT,
    drive_id       INTEGER NOT NULL REFERENCES drives (id),
    position_id    INTEGER REFERENCES positions (id),
    at             DATETIME NOT NULL,
    type           text NOT NULL,
    trip_cause     text NOT NULL DEFAULT '',
    state          text NOT NULL DEFAULT '',
    failure_mode   text NOT NULL DEFAULT '',
    failure_cause  text NOT NULL DEFAULT '',
    component      text NOT NULL DEFAULT '',
    notes          text NOT NULL DEFAULT '',
    created_at     DATETIME NOT NULL,
    updated_at     DATETIME NOT NULL
);
CREATE INDEX events_drive ON events (drive_id, at);

CREATE TABLE tokens (
    id            INTEGER PRIMARY KEY AUTOINCREMENT,
    name          text NOT NULL,
    role          text NOT NULL,
    sites         TEXT NOT NULL DEFAULT '[]',
    prefix        text NOT NULL UNIQUE,
    hash          BLOB NOT NULL,
    expires_at    DATETIME,
    revoked_at    DATETIME,
    last_used_at  DATETIME,
    created_at    DATETIME NOT NULL,
    updated_at    DATETIME NOT NULL
);

CREATE TABLE audit (
    id           INTEGER PRIMARY KEY AUTOINCREMENT,
    at           DATETIME NOT NULL,
    actor        text NOT NULL,
    action       text NOT NULL,
    resource     text NOT NULL,
    resource_id  INTEGER NOT NULL DEFAULT 0,
    before       TEXT,
    after        TEXT
);
CREATE INDEX audit_at ON audit (at);
CREATE INDEX audit_resource ON audit (resource, resource_id);

-- +goose Down
DROP TABLE audit;
DROP TABLE tokens;
DROP TABLE events;
DROP TABLE installations;
DROP TABLE components;
DROP TABLE drives;
DROP TABLE positions;
DROP TABLE drive_models;
DROP TABLE areas;
DROP TABLE sites;
