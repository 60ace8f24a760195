-- +goose Up
-- A life ledger's closed day buckets change once a day, the rest of it
-- with every reading; they are kept apart so a run rewrites them only when
-- they have changed (see the PostgreSQL file of this version). NULL means
-- the ledger column holds the days too.
ALTER TABLE drive_state ADD COLUMN capacitor_days BLOB;
ALTER TABLE drive_state ADD COLUMN fan_days BLOB;

-- +goose Down
UPDATE drive_state SET params_hash = '' WHERE capacitor_days IS NOT NULL OR fan_days IS NOT NULL;
ALTER TABLE drive_state DROP COLUMN capacitor_days;
ALTER TABLE drive_state DROP COLUMN fan_days;
