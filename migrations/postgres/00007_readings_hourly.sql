-- +goose Up
-- Hourly roll-ups of readings older than the raw retention. stats keeps
-- min, mean and max of each logged field and the mean square of current
-- for pages and trends; agg keeps the time-at-temperature bins and current
-- moments (health.HourAggregate) from which capacitor and fan life can be
-- recomputed after the raw rows are gone.
CREATE TABLE readings_hourly (
    drive_id          bigint NOT NULL,
    hour              timestamptz NOT NULL,
    position_id       bigint NOT NULL,
    samples           integer NOT NULL,
    stats             jsonb NOT NULL,
    agg               jsonb NOT NULL,
    PRIMARY KEY (drive_id, hour)
);

-- +goose Down
DROP TABLE readings_hourly;
