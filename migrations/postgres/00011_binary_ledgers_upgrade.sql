-- +goose Up
-- Stores made by releases before the binary life ledgers (migration 00003
-- then made the ledgers and the report jsonb) are brought to the binary
-- columns a store made since has. A ledger in the old JSON form cannot be
-- read by this release, so those rows go: the next assessment finds no
-- state for the drive and recomputes it in full from its readings. The
-- report keeps its JSON, as bytes. A store made since has bytea already,
-- and nothing happens.
-- +goose StatementBegin
DO $$
BEGIN
    IF (SELECT data_type FROM information_schema.columns
        WHERE table_schema = current_schema() AND table_name = 'drive_state' AND column_name = 'capacitor_state') = 'jsonb' THEN
        DELETE FROM drive_state;
        ALTER TABLE drive_state
            ALTER COLUMN capacitor_state TYPE bytea USING convert_to(capacitor_state::text, 'UTF8'),
            ALTER COLUMN fan_state TYPE bytea USING convert_to(fan_state::text, 'UTF8');
        ALTER TABLE drive_state ALTER COLUMN capacitor_state SET COMPRESSION lz4;
        ALTER TABLE drive_state ALTER COLUMN fan_state SET COMPRESSION lz4;
    END IF;
    IF (SELECT data_type FROM information_schema.columns
        WHERE table_schema = current_schema() AND table_name = 'assessments' AND column_name = 'report') = 'jsonb' THEN
        ALTER TABLE assessments ALTER COLUMN report TYPE bytea USING convert_to(report::text, 'UTF8');
        ALTER TABLE assessments ALTER COLUMN report SET COMPRESSION lz4;
    END IF;
END
$$;
-- +goose StatementEnd

-- +goose Down
-- Nothing to undo: the columns stay as 00003 now makes them.
SELECT 1;
