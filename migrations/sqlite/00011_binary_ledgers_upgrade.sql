-- +goose Up
-- Stores made by releases before the binary life ledgers kept the ledgers
-- and the report as JSON text. This release cannot read ledgers in that
-- form, so those rows go: the next assessment finds no state for the
-- drive and recomputes it in full from its readings. A report keeps its
-- JSON, as bytes (the store reads the report as bytes and cannot take
-- text). SQLite keeps any value in any column, so the columns themselves
-- need no change.
DELETE FROM drive_state WHERE typeof(capacitor_state) = 'text' OR typeof(fan_state) = 'text';
UPDATE assessments SET report = CAST(report AS BLOB) WHERE typeof(report) = 'text';

-- +goose Down
SELECT 1;
