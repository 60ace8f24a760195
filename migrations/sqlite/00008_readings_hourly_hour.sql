-- +goose Up
-- Lets the ingest ask cheaply whether a month has been rolled up, so a late
-- reading for an hour that only survives as an aggregate is refused rather
-- than acknowledged and then lost at the next roll-up.
CREATE INDEX readings_hourly_hour ON readings_hourly (hour);

-- +goose Down
DROP INDEX readings_hourly_hour;
