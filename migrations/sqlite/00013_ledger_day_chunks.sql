-- +goose Up
-- A life ledger's closed day buckets are kept in chunks of 64 days, one
-- row each, so a closing day rewrites its chunk only (see the PostgreSQL
-- file of this version).
CREATE TABLE ledger_day_chunks (
    drive_id  INTEGER NOT NULL REFERENCES drives (id) ON DELETE CASCADE,
    ledger    INTEGER NOT NULL,
    chunk     INTEGER NOT NULL,
    days      BLOB    NOT NULL,
    PRIMARY KEY (drive_id, ledger, chunk)
);

-- +goose Down
UPDATE drive_state SET params_hash = '' WHERE drive_id IN (SELECT DISTINCT drive_id FROM ledger_day_chunks);
DROP TABLE ledger_day_chunks;
