-- +goose Up
-- A life ledger's closed day buckets (up to 400, about 7 kB) change once a
-- day; the rest of it with every reading. They are kept in columns of
-- their own, which a run rewrites only when they have changed: an
-- assessment every quarter hour then writes about 0.2 kB of ledger per
-- drive instead of 7 kB. NULL means the ledger column holds the days too,
-- as every ledger stored before this version does; the next save splits
-- it.
ALTER TABLE drive_state ADD COLUMN capacitor_days bytea;
ALTER TABLE drive_state ADD COLUMN fan_days bytea;
ALTER TABLE drive_state ALTER COLUMN capacitor_days SET COMPRESSION lz4;
ALTER TABLE drive_state ALTER COLUMN fan_days SET COMPRESSION lz4;

-- +goose Down
-- The ledgers split by this version lose their closed days here, so their
-- drives are marked for a full recompute, which rebuilds them from the
-- readings.
UPDATE drive_state SET params_hash = '' WHERE capacitor_days IS NOT NULL OR fan_days IS NOT NULL;
ALTER TABLE drive_state DROP COLUMN capacitor_days;
ALTER TABLE drive_state DROP COLUMN fan_days;
