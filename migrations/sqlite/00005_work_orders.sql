-- +goose Up
-- Work orders: physical work proposed from findings, from the replacement
-- forecast and from recurring tasks, grouped by site, area and due window
-- so one visit covers several drives; then approved, scheduled, done or
-- cancelled by a planner. Each line keeps the cause it came from
-- (cause_key), so a planning run never proposes it twice and can withdraw
-- it when the cause clears.
CREATE TABLE work_orders (
    id             INTEGER PRIMARY KEY AUTOINCREMENT,
    site_id        INTEGER NOT NULL REFERENCES sites (id),
    area_id        INTEGER REFERENCES areas (id),
    status         text NOT NULL CHECK (status IN ('proposed', 'approved', 'scheduled', 'done', 'cancelled', 'withdrawn')),
    origin         text NOT NULL CHECK (origin IN ('planning', 'manual')),
    title          text NOT NULL,
    window_start   DATETIME NOT NULL,
    window_end     DATETIME NOT NULL,
    due_at         DATETIME NOT NULL,
    priority       integer NOT NULL,
    risk_score     REAL NOT NULL DEFAULT 0,
    scheduled_for  DATETIME,
    external_ref   text NOT NULL DEFAULT '',
    notes          text NOT NULL DEFAULT '',
    status_reason  text NOT NULL DEFAULT '',
    proposed_at    DATETIME NOT NULL,
    proposed_by    text NOT NULL DEFAULT '',
    approved_at    DATETIME,
    approved_by    text NOT NULL DEFAULT '',
    scheduled_at   DATETIME,
    scheduled_by   text NOT NULL DEFAULT '',
    done_at        DATETIME,
    done_by        text NOT NULL DEFAULT '',
    cancelled_at   DATETIME,
    cancelled_by   text NOT NULL DEFAULT '',
    withdrawn_at   DATETIME,
    created_at     DATETIME NOT NULL,
    updated_at     DATETIME NOT NULL
);
CREATE UNIQUE INDEX work_orders_external_ref ON work_orders (external_ref) WHERE external_ref <> '';
CREATE INDEX work_orders_group ON work_orders (site_id, area_id, window_start, status);
CREATE INDEX work_orders_status ON work_orders (status, due_at);

CREATE TABLE work_order_lines (
    id                    INTEGER PRIMARY KEY AUTOINCREMENT,
    work_order_id         INTEGER NOT NULL REFERENCES work_orders (id) ON DELETE CASCADE,
    drive_id              INTEGER NOT NULL REFERENCES drives (id),
    position_id           INTEGER REFERENCES positions (id),
    task                  text NOT NULL,
    parts                 text NOT NULL DEFAULT '',
    labour_h              REAL NOT NULL DEFAULT 0,
    reason                text NOT NULL,
    cause_kind            text NOT NULL CHECK (cause_kind IN ('finding', 'forecast', 'recurring', 'manual')),
    cause_key             text NOT NULL,
    finding_id            INTEGER REFERENCES findings (id) ON DELETE SET NULL,
    due_at                DATETIME NOT NULL,
    risk_score            REAL NOT NULL DEFAULT 0,
    priority              integer NOT NULL,
    state                 text NOT NULL CHECK (state IN ('active', 'withdrawn')),
    withdrawn_at          DATETIME,
    cause_cleared_at      DATETIME,
    outcome               text NOT NULL DEFAULT '',
    action                text NOT NULL DEFAULT '',
    found_failure_mode    text NOT NULL DEFAULT '',
    found_capacitance_uf  REAL,
    found_esr_milliohm    REAL,
    swap_drive_id         INTEGER REFERENCES drives (id),
    new_component_id      INTEGER REFERENCES components (id),
    completion_notes      text NOT NULL DEFAULT '',
    created_at            DATETIME NOT NULL,
    updated_at            DATETIME NOT NULL
);
CREATE INDEX work_order_lines_order ON work_order_lines (work_order_id);
CREATE INDEX work_order_lines_cause ON work_order_lines (cause_key);
CREATE INDEX work_order_lines_drive ON work_order_lines (drive_id);

-- +goose Down
DROP TABLE work_order_lines;
DROP TABLE work_orders;
