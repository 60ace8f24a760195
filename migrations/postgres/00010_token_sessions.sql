-- +goose Up
-- Signing out of the pages ends every page session the token opened before
-- this time, on every replica (sessions are signed cookies, kept nowhere).
ALTER TABLE tokens ADD COLUMN sessions_after timestamptz;

-- +goose Down
ALTER TABLE tokens DROP COLUMN sessions_after;
