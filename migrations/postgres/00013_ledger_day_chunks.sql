-- +goose Up
-- A life ledger's closed day buckets (up to 400, about 7 kB) are kept in
-- chunks of 64 days, one row each, instead of one value in drive_state: a
-- day that closes rewrites its chunk (about 1 kB) rather than all 400
-- days, so the work of a run grows with its new readings, not with the
-- history. The days columns of drive_state hold what earlier versions
-- wrote; a state's next save moves them into chunks and leaves the column
-- holding no days.
CREATE TABLE ledger_day_chunks (
    drive_id  bigint   NOT NULL REFERENCES drives (id) ON DELETE CASCADE,
    ledger    smallint NOT NULL,  -- 0 capacitor bank, 1 cooling fan
    chunk     integer  NOT NULL,  -- the first day of the chunk / 64 (days since 1970-01-01)
    days      bytea    NOT NULL,  -- health.EncodeDays
    PRIMARY KEY (drive_id, ledger, chunk)
);

-- +goose Down
-- The chunks cannot be put back into drive_state here, so the drives that
-- have them are marked for a full recompute, which rebuilds their ledgers
-- from the readings.
UPDATE drive_state SET params_hash = '' WHERE drive_id IN (SELECT DISTINCT drive_id FROM ledger_day_chunks);
DROP TABLE ledger_day_chunks;
