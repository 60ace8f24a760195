-- +goose Up
-- Signing out of the pages ends every page session the token opened before
-- this time (see the PostgreSQL migration).
ALTER TABLE tokens ADD COLUMN sessions_after DATETIME;

-- +goose Down
ALTER TABLE tokens DROP COLUMN sessions_after;
