-- Readiness: how ready a zone is to be instrumented, beside what it is worth. Criteria are
-- fixed by this migration (the admin sets their weights); the lead scores each zone 1 to 5.

CREATE TABLE readiness_criteria (
    id         INTEGER PRIMARY KEY,
    key        TEXT    NOT NULL UNIQUE,
    label      TEXT    NOT NULL,
    hint       TEXT    NOT NULL,
    weight     INTEGER NOT NULL CHECK (weight BETWEEN 0 AND 10),
    position   INTEGER NOT NULL,
    updated_at TEXT    NOT NULL,
    updated_by TEXT    NOT NULL
) STRICT;

INSERT INTO readiness_criteria (key, label, hint, weight, position, updated_at, updated_by) VALUES
    ('data_reach', 'Data within reach',
     '5 = the signals needed are already logged and reachable; 1 = nothing is recorded yet', 3, 1,
     '2026-12-02T00:00:00Z', 'migration'),
    ('fit_with_systems', 'Fit with existing systems',
     '5 = plugs into the line controller and historian as they are; 1 = new networks and interfaces', 2, 2,
     '2026-12-02T00:00:00Z', 'migration'),
    ('expert_time', 'Process experts on hand',
     '5 = the people who know the process have time to label and review; 1 = none available', 2, 3,
     '2026-12-02T00:00:00Z', 'migration'),
    ('safe_while_running', 'Safe to change while running',
     '5 = installable without touching running production; 1 = needs long stops or safety re-approval', 3, 4,
     '2026-12-02T00:00:00Z', 'migration');

CREATE TABLE readiness_scores (
    zone_id      INTEGER NOT NULL REFERENCES zones (id) ON DELETE RESTRICT,
    criterion_id INTEGER NOT NULL REFERENCES readiness_criteria (id) ON DELETE RESTRICT,
    score        INTEGER NOT NULL CHECK (score BETWEEN 1 AND 5),
    rated_at     TEXT    NOT NULL,
    rated_by     TEXT    NOT NULL,
    PRIMARY KEY (zone_id, criterion_id)
) STRICT;
