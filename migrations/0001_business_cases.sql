-- Business cases: site settings, zones, scenario versions, cost items and benefit drivers.
-- Money and rates are canonical decimal TEXT (rust_decimal's Display form), never REAL:
-- SQLite has no exact decimal type, and nothing here SUMs money in SQL.
-- Timestamps are RFC 3339 UTC text. Months are 'YYYY-MM'.

CREATE TABLE site_settings (
    id                     INTEGER PRIMARY KEY CHECK (id = 1),
    plant_name             TEXT    NOT NULL,
    currency               TEXT    NOT NULL CHECK (length(currency) = 3 AND currency = upper(currency)),
    hurdle_rate            TEXT    NOT NULL,
    tax_rate               TEXT,
    depreciation_years     INTEGER CHECK (depreciation_years IS NULL OR depreciation_years BETWEEN 1 AND 50),
    default_horizon_months INTEGER NOT NULL CHECK (default_horizon_months BETWEEN 1 AND 240),
    expert_multiplier      TEXT    NOT NULL,
    updated_at             TEXT    NOT NULL,
    updated_by             TEXT    NOT NULL
) STRICT;

CREATE TABLE zones (
    id          INTEGER PRIMARY KEY,
    code        TEXT NOT NULL UNIQUE,
    name        TEXT NOT NULL,
    description TEXT NOT NULL DEFAULT '',
    owner       TEXT NOT NULL DEFAULT '',
    status      TEXT NOT NULL CHECK (status IN ('candidate', 'approved', 'piloting', 'measuring', 'closed', 'shelved')),
    created_at  TEXT NOT NULL,
    created_by  TEXT NOT NULL,
    updated_at  TEXT NOT NULL,
    updated_by  TEXT NOT NULL
) STRICT;

-- One row per scenario version of a zone's business case. Later issues freeze an approved
-- version as the baseline; `state` is there for them.
CREATE TABLE case_versions (
    id                  INTEGER PRIMARY KEY,
    zone_id             INTEGER NOT NULL REFERENCES zones (id) ON DELETE RESTRICT,
    version             INTEGER NOT NULL CHECK (version >= 1),
    label               TEXT    NOT NULL,
    horizon_months      INTEGER NOT NULL CHECK (horizon_months BETWEEN 1 AND 240),
    start_month         TEXT    NOT NULL CHECK (start_month GLOB '[0-9][0-9][0-9][0-9]-[0-1][0-9]'),
    go_live_offset      INTEGER NOT NULL CHECK (go_live_offset >= 0),
    ramp_up_months      INTEGER NOT NULL CHECK (ramp_up_months >= 0),
    success_probability TEXT    NOT NULL,
    state               TEXT    NOT NULL DEFAULT 'draft' CHECK (state IN ('draft', 'submitted', 'approved', 'superseded')),
    created_at          TEXT    NOT NULL,
    created_by          TEXT    NOT NULL,
    updated_at          TEXT    NOT NULL,
    updated_by          TEXT    NOT NULL,
    UNIQUE (zone_id, version)
) STRICT;

CREATE TABLE cost_items (
    id           INTEGER PRIMARY KEY,
    case_id      INTEGER NOT NULL REFERENCES case_versions (id) ON DELETE CASCADE,
    label        TEXT    NOT NULL,
    category     TEXT    NOT NULL CHECK (category IN ('hardware', 'integration', 'software', 'people', 'training', 'other')),
    kind         TEXT    NOT NULL CHECK (kind IN ('one_off', 'recurring')),
    amount       TEXT    NOT NULL,
    month_offset INTEGER NOT NULL CHECK (month_offset >= 0),
    escalation   TEXT    NOT NULL,
    capex        INTEGER NOT NULL CHECK (capex IN (0, 1)),
    created_at   TEXT    NOT NULL,
    created_by   TEXT    NOT NULL
) STRICT;
CREATE INDEX cost_items_case ON cost_items (case_id);

CREATE TABLE benefit_drivers (
    id           INTEGER PRIMARY KEY,
    case_id      INTEGER NOT NULL REFERENCES case_versions (id) ON DELETE CASCADE,
    label        TEXT    NOT NULL,
    kind         TEXT    NOT NULL CHECK (kind IN ('scrap', 'energy', 'downtime', 'expert_time', 'other')),
    unit         TEXT    NOT NULL,
    qty_low      TEXT    NOT NULL,
    qty_likely   TEXT    NOT NULL,
    qty_high     TEXT    NOT NULL,
    unit_value   TEXT    NOT NULL,
    escalation   TEXT    NOT NULL,
    created_at   TEXT    NOT NULL,
    created_by   TEXT    NOT NULL
) STRICT;
CREATE INDEX benefit_drivers_case ON benefit_drivers (case_id);
