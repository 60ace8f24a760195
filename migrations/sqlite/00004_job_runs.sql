-- +goose Up
-- job_runs records every run of a scheduled or manual job. The unique key
-- (job, tick) is how a scheduled run is claimed once.
CREATE TABLE job_runs (
    id             INTEGER PRIMARY KEY AUTOINCREMENT,
    job            text NOT NULL,
    tick           DATETIME NOT NULL,
    manual         boolean NOT NULL DEFAULT false,
    requested_by   text NOT NULL DEFAULT '',
    runner         text NOT NULL DEFAULT '',
    status         text NOT NULL CHECK (status IN ('running', 'succeeded', 'failed', 'skipped')),
    started_at     DATETIME NOT NULL,
    heartbeat_at   DATETIME NOT NULL,
    finished_at    DATETIME,
    drives         INTEGER NOT NULL DEFAULT 0,
    readings       INTEGER NOT NULL DEFAULT 0,
    progress_done  INTEGER NOT NULL DEFAULT 0,
    progress_total INTEGER NOT NULL DEFAULT 0,
    note           text NOT NULL DEFAULT '',
    error          text NOT NULL DEFAULT '',
    UNIQUE (job, tick)
);
CREATE INDEX job_runs_running ON job_runs (job) WHERE status = 'running';
CREATE INDEX job_runs_finished ON job_runs (job, finished_at);

-- +goose Down
DROP TABLE job_runs;
