-- +goose Up
-- Readings, the assessment watermark of each drive, and the answers kept for
-- the Idempotency-Key header.
--
-- readings holds one row per drive and logged time: the natural key
-- (drive_id, at) makes a replayed batch harmless. drive_id is the drive that
-- stood at the position at that time (from the installation history);
-- position_id is kept beside it so environment and duty can be looked up
-- without walking the history again. Every measurement is nullable: a drive
-- logs what it can.
--
-- The table is partitioned by month on `at`. The server creates the monthly
-- partitions (readings_pYYYYMM) ahead of time and before it inserts a batch
-- that needs a new month (store.EnsureReadingPartitions), so the DEFAULT
-- partition stays empty; it is a safety net for rows written by other means,
-- and a partition made later for a month with rows in DEFAULT takes those
-- rows over in the same transaction.
--
-- No foreign keys on readings: a foreign key on a partitioned table checks
-- every inserted row against drives and positions, which costs ingest speed,
-- and the ingest already resolves and checks every reference once per batch.
-- A drive with readings cannot be deleted (store.driveInfo lists readings
-- among the tables that block a delete).
CREATE TABLE readings (
    drive_id                            bigint NOT NULL,
    at                                  timestamptz NOT NULL,
    position_id                         bigint NOT NULL,
    internal_air_c                      double precision,
    ambient_c                           double precision,
    heatsink_c                          double precision,
    current_a                           double precision,
    peak_current_a                      double precision,
    frequency_hz                        double precision,
    bus_v                               double precision,
    bus_ripple_v                        double precision,
    run_hours_h                         double precision,
    power_on_hours_h                    double precision,
    drive_capacitor_life_used_fraction  double precision,
    drive_fan_life_used_fraction        double precision,
    capacitance_uf                      double precision,
    esr_milliohm                        double precision,
    PRIMARY KEY (drive_id, at)
) PARTITION BY RANGE (at);

CREATE TABLE readings_default PARTITION OF readings DEFAULT;

-- drive_watermarks: how far the assessment has processed each drive's
-- readings. The assessment writes assessed_to and clears recompute_from; the
-- ingest, in the transaction that inserts readings, lowers recompute_from to
-- the earliest new reading of every drive that received one at or before its
-- assessed_to (a late reading marks its drive for recomputation from then).
CREATE TABLE drive_watermarks (
    drive_id        bigint PRIMARY KEY REFERENCES drives (id) ON DELETE CASCADE,
    assessed_to     timestamptz NOT NULL,
    recompute_from  timestamptz
);

-- idempotency_keys: the first answer to a request that carried an
-- Idempotency-Key, per token, kept 24 hours. status 0 marks a request still
-- being processed.
CREATE TABLE idempotency_keys (
    token_id      bigint NOT NULL REFERENCES tokens (id) ON DELETE CASCADE,
    key           text NOT NULL,
    request_hash  bytea NOT NULL,
    status        integer NOT NULL DEFAULT 0,
    content_type  text NOT NULL DEFAULT '',
    body          bytea,
    created_at    timestamptz NOT NULL,
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
