-- +goose Up
-- Assessment results: each drive's accumulated life state, its latest
-- assessment and a daily history for trends, the findings with their
-- lifecycle, and an outbox for finding notifications.

CREATE TABLE drive_state (
    drive_id                INTEGER PRIMARY KEY REFERENCES drives (id) ON DELETE CASCADE,
    capacitor_component_id  INTEGER,
    fan_component_id        INTEGER,
    capacitor_state         BLOB NOT NULL,
    fan_state               BLOB NOT NULL,
    measured                TEXT,
    params_hash             text NOT NULL,
    stored_to               DATETIME,
    trend_at                DATETIME,
    unobserved_capacitor_h  REAL NOT NULL DEFAULT 0,
    unobserved_fan_h        REAL NOT NULL DEFAULT 0,
    updated_at              DATETIME NOT NULL
);

CREATE TABLE assessments (
    drive_id                      INTEGER PRIMARY KEY REFERENCES drives (id) ON DELETE CASCADE,
    site_id                       INTEGER NOT NULL,
    position_id                   INTEGER,
    at                            DATETIME NOT NULL,
    capacitor_life_used_fraction  REAL NOT NULL,
    capacitor_remaining_h         REAL,
    capacitor_end_of_life         DATETIME,
    fan_life_used_fraction        REAL NOT NULL,
    fan_remaining_h               REAL,
    fan_end_of_life               DATETIME,
    allowed_current_a             REAL,
    utilisation_fraction          REAL,
    health_band                   text NOT NULL,
    risk_score                    REAL NOT NULL,
    health_score                  REAL NOT NULL,
    report                        BLOB NOT NULL
);
CREATE INDEX assessments_site_band ON assessments (site_id, health_band);
CREATE INDEX assessments_risk ON assessments (risk_score DESC);

CREATE TABLE assessment_days (
    drive_id                      INTEGER NOT NULL REFERENCES drives (id) ON DELETE CASCADE,
    day                           TEXT NOT NULL,
    position_id                   INTEGER,
    capacitor_life_used_fraction  REAL NOT NULL,
    fan_life_used_fraction        REAL NOT NULL,
    capacitor_end_of_life         DATETIME,
    utilisation_fraction          REAL,
    allowed_current_a             REAL,
    risk_score                    REAL NOT NULL,
    health_band                   text NOT NULL,
    PRIMARY KEY (drive_id, day)
);

CREATE TABLE findings (
    id                INTEGER PRIMARY KEY AUTOINCREMENT,
    drive_id          INTEGER NOT NULL REFERENCES drives (id) ON DELETE CASCADE,
    site_id           INTEGER NOT NULL,
    area_id           INTEGER,
    position_id       INTEGER,
    rule              text NOT NULL,
    kind              text NOT NULL,
    severity          text NOT NULL,
    status            text NOT NULL,
    message           text NOT NULL,
    evidence          TEXT NOT NULL,
    remedy            text NOT NULL,
    physical_work     boolean NOT NULL DEFAULT false,
    first_seen_at     DATETIME NOT NULL,
    last_seen_at      DATETIME NOT NULL,
    cleared_at        DATETIME,
    resolved_at       DATETIME,
    acknowledged_at   DATETIME,
    acknowledged_by   text NOT NULL DEFAULT '',
    suppressed_at     DATETIME,
    suppressed_by     text NOT NULL DEFAULT '',
    suppressed_until  DATETIME,
    status_reason     text NOT NULL DEFAULT '',
    created_at        DATETIME NOT NULL,
    updated_at        DATETIME NOT NULL
);
-- One finding per (drive, rule) while it holds; resolved ones stay as history.
CREATE UNIQUE INDEX findings_active ON findings (drive_id, rule) WHERE status <> 'resolved';
CREATE INDEX findings_site_status ON findings (site_id, status, severity);
CREATE INDEX findings_position ON findings (position_id);

CREATE TABLE notifications (
    id               INTEGER PRIMARY KEY AUTOINCREMENT,
    finding_id       INTEGER NOT NULL REFERENCES findings (id) ON DELETE CASCADE,
    payload          TEXT NOT NULL,
    attempts         integer NOT NULL DEFAULT 0,
    next_attempt_at  DATETIME NOT NULL,
    delivered_at     DATETIME,
    last_error       text NOT NULL DEFAULT '',
    created_at       DATETIME NOT NULL
);
CREATE INDEX notifications_due ON notifications (next_attempt_at) WHERE delivered_at IS NULL;

-- Parameter overrides, layered defaults < site < area < drive model.
ALTER TABLE sites ADD COLUMN parameters TEXT NOT NULL DEFAULT '{}';
ALTER TABLE areas ADD COLUMN parameters TEXT NOT NULL DEFAULT '{}';
ALTER TABLE drive_models ADD COLUMN parameters TEXT NOT NULL DEFAULT '{}';

-- +goose Down
ALTER TABLE drive_models DROP COLUMN parameters;
ALTER TABLE areas DROP COLUMN parameters;
ALTER TABLE sites DROP COLUMN parameters;
DROP TABLE notifications;
DROP TABLE findings;
DROP TABLE assessment_days;
DROP TABLE assessments;
DROP TABLE drive_state;
