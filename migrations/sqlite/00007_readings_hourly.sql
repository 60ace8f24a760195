-- +goose Up
-- Hourly roll-ups of readings older than the raw retention (see the
-- PostgreSQL migration). hour is Unix microseconds, as readings.at.
CREATE TABLE readings_hourly (
    drive_id          INTEGER NOT NULL,
    hour              INTEGER NOT NULL,
    position_id       INTEGER NOT NULL,
    samples           INTEGER NOT NULL,
    stats             TEXT NOT NULL,
    agg               TEXT NOT NULL,
    PRIMARY KEY (drive_id, hour)
) WITHOUT ROWID;

-- +goose Down
DROP TABLE readings_hourly;
