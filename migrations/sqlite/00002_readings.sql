-- +goose Up
-- Readings, the assessment watermark of each drive, and the answers kept for
-- the Idempotency-Key header. See the PostgreSQL migration of the same
-- number for what each table means.
--
-- SQLite keeps readings in one plain table, clustered on its natural key
-- (WITHOUT ROWID), so one drive's readings sit together in time order.
-- Times in these tables are INTEGER Unix microseconds (UTC): integers compare
-- and sort correctly and cost less than text times to write and read. The
-- register's DATETIME columns are unchanged.
CREATE TABLE readings (
    drive_id                            INTEGER NOT NULL,
    at                                  INTEGER NOT NULL,
    position_id                         INTEGER NOT NULL,
    internal_air_c                      REAL,
    ambient_c                           REAL,
    heatsink_c                          REAL,
    current_a                           REAL,
    peak_current_a                      REAL,
    frequency_hz                        REAL,
    bus_v                               REAL,
    bus_ripple_v                        REAL,
    run_hours_h                         REAL,
    power_on_hours_h                    REAL,
    drive_capacitor_life_used_fraction  REAL,
    drive_fan_life_used_fraction        REAL,
    capacitance_uf                      REAL,
    esr_milliohm                        REAL,
    PRIMARY KEY (drive_id, at)
) WITHOUT ROWID;

CREATE TABLE drive_watermarks (
    drive_id        INTEGER PRIMARY KEY REFERENCES drives (id) ON DELETE CASCADE,
    assessed_to     INTEGER NOT NULL,
    recompute_from  INTEGER
);

CREATE TABLE idempotency_keys (
    token_id      INTEGER NOT NULL REFERENCES tokens (id) ON DELETE CASCADE,
    key           TEXT NOT NULL,
    request_hash  BLOB NOT NULL,
    status        INTEGER NOT NULL DEFAULT 0,
    content_type  TEXT NOT NULL DEFAULT '',
    body          BLOB,
    created_at    INTEGER NOT NULL,
    PRIMARY KEY (token_id, key)
);
CREATE INDEX idempotency_keys_created ON idempotency_keys (created_at);

-- The ingest finds positions by tag; the register's unique index leads
-- with site_id and cannot serve that.
CREATE INDEX positions_tag ON positions (tag);

-- +goose Down
DROP INDEX positions_tag;
DROP TABLE idempotency_keys;
DROP TABLE drive_watermarks;
DROP TABLE readings;
