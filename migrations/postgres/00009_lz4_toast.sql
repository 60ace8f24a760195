-- +goose Up
-- The large values every assessment rewrites (the report, about 14 kB, and
-- the two life ledgers, about 6 kB each) are compressed with lz4 instead of
-- pglz: it compresses several times faster at a similar ratio, and these
-- columns are written once per drive on every run.
ALTER TABLE assessments ALTER COLUMN report SET COMPRESSION lz4;
ALTER TABLE drive_state ALTER COLUMN capacitor_state SET COMPRESSION lz4;
ALTER TABLE drive_state ALTER COLUMN fan_state SET COMPRESSION lz4;

-- +goose Down
ALTER TABLE assessments ALTER COLUMN report SET COMPRESSION pglz;
ALTER TABLE drive_state ALTER COLUMN capacitor_state SET COMPRESSION pglz;
ALTER TABLE drive_state ALTER COLUMN fan_state SET COMPRESSION pglz;
