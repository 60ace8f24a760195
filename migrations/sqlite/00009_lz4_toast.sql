-- +goose Up
-- PostgreSQL moves its large assessment columns to lz4 compression in this
-- version; SQLite stores them as they are, so there is nothing to do. The
-- file keeps both dialects at the same schema version.
SELECT 1;

-- +goose Down
SELECT 1;
