-- The benefit ledger: measured savings and actual spending per zone, append-only.
-- Approval freezes a case version as the zone's baseline.

ALTER TABLE case_versions ADD COLUMN approved_at TEXT;
ALTER TABLE case_versions ADD COLUMN approved_by TEXT;

-- At most one approved (baseline) version per zone.
CREATE UNIQUE INDEX case_versions_one_baseline ON case_versions (zone_id) WHERE state = 'approved';

-- An approved or superseded version is frozen: its items cannot change, and of its own row
-- only the move from approved to superseded is allowed.
CREATE TRIGGER case_versions_frozen BEFORE UPDATE ON case_versions
WHEN OLD.state IN ('approved', 'superseded') AND NOT (OLD.state = 'approved' AND NEW.state = 'superseded'
     AND NEW.label = OLD.label AND NEW.horizon_months = OLD.horizon_months AND NEW.start_month = OLD.start_month
     AND NEW.go_live_offset = OLD.go_live_offset AND NEW.ramp_up_months = OLD.ramp_up_months
     AND NEW.success_probability = OLD.success_probability)
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen: save a new scenario version');
END;

CREATE TRIGGER cost_items_frozen_update BEFORE UPDATE ON cost_items
WHEN (SELECT state FROM case_versions WHERE id = OLD.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;
CREATE TRIGGER cost_items_frozen_delete BEFORE DELETE ON cost_items
WHEN (SELECT state FROM case_versions WHERE id = OLD.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;
CREATE TRIGGER cost_items_frozen_insert BEFORE INSERT ON cost_items
WHEN (SELECT state FROM case_versions WHERE id = NEW.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;
CREATE TRIGGER benefit_drivers_frozen_update BEFORE UPDATE ON benefit_drivers
WHEN (SELECT state FROM case_versions WHERE id = OLD.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;
CREATE TRIGGER benefit_drivers_frozen_delete BEFORE DELETE ON benefit_drivers
WHEN (SELECT state FROM case_versions WHERE id = OLD.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;
CREATE TRIGGER benefit_drivers_frozen_insert BEFORE INSERT ON benefit_drivers
WHEN (SELECT state FROM case_versions WHERE id = NEW.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;

-- One CSV import per distinct file content.
CREATE TABLE ledger_imports (
    id           INTEGER PRIMARY KEY,
    zone_id      INTEGER NOT NULL REFERENCES zones (id),
    content_hash TEXT    NOT NULL UNIQUE,
    file_name    TEXT    NOT NULL,
    row_count    INTEGER NOT NULL,
    imported_at  TEXT    NOT NULL,
    imported_by  TEXT    NOT NULL
) STRICT;

-- Amounts are signed money flows: savings positive, spending negative. A correction is a new
-- row reversing an earlier one (negated quantity and amount); each row can be reversed once.
CREATE TABLE ledger_entries (
    id                   INTEGER PRIMARY KEY,
    zone_id              INTEGER NOT NULL REFERENCES zones (id),
    case_id              INTEGER NOT NULL REFERENCES case_versions (id),
    kind                 TEXT    NOT NULL CHECK (kind IN ('saving', 'spending')),
    driver_id            INTEGER REFERENCES benefit_drivers (id),
    cost_id              INTEGER REFERENCES cost_items (id),
    period               TEXT    NOT NULL CHECK (period GLOB '[0-9][0-9][0-9][0-9]-[0-1][0-9]'),
    method               TEXT    NOT NULL CHECK (method IN ('direct', 'normalized', 'spend')),
    quantity             TEXT,
    unit_value           TEXT,
    amount               TEXT    NOT NULL,
    baseline_intensity   TEXT,
    reporting_volume     TEXT,
    measured_consumption TEXT,
    evidence             TEXT    NOT NULL CHECK (length(evidence) > 0),
    reverses_id          INTEGER UNIQUE REFERENCES ledger_entries (id),
    idempotency_key      TEXT    UNIQUE,
    import_id            INTEGER REFERENCES ledger_imports (id),
    booked_at            TEXT    NOT NULL,
    booked_by            TEXT    NOT NULL,
    CHECK ((kind = 'saving' AND driver_id IS NOT NULL AND cost_id IS NULL AND method IN ('direct', 'normalized'))
        OR (kind = 'spending' AND cost_id IS NOT NULL AND driver_id IS NULL AND method = 'spend'))
) STRICT;
CREATE INDEX ledger_entries_zone ON ledger_entries (zone_id, period);

CREATE TRIGGER ledger_entries_no_update BEFORE UPDATE ON ledger_entries
BEGIN
    SELECT RAISE(ABORT, 'ledger entries are append-only: book a reversing entry instead');
END;
CREATE TRIGGER ledger_entries_no_delete BEFORE DELETE ON ledger_entries
BEGIN
    SELECT RAISE(ABORT, 'ledger entries are append-only: book a reversing entry instead');
END;
-- A reversal cannot itself be reversed (book a new entry instead).
CREATE TRIGGER ledger_entries_no_reversal_of_reversal BEFORE INSERT ON ledger_entries
WHEN NEW.reverses_id IS NOT NULL AND (SELECT reverses_id FROM ledger_entries WHERE id = NEW.reverses_id) IS NOT NULL
BEGIN
    SELECT RAISE(ABORT, 'a reversing entry cannot be reversed: book a new entry instead');
END;
CREATE TRIGGER ledger_imports_no_update BEFORE UPDATE ON ledger_imports
BEGIN
    SELECT RAISE(ABORT, 'imports are append-only');
END;
CREATE TRIGGER ledger_imports_no_delete BEFORE DELETE ON ledger_imports
BEGIN
    SELECT RAISE(ABORT, 'imports are append-only');
END;
