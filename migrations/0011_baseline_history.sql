-- Baselines that keep their history (issue 11, point 2).
-- * item_uid: a cost item's or driver's identity across the versions of its zone's case.
--   Copying a version carries it (src/db/cases.rs `copy_case`); an item added to a draft takes
--   the identity of the zone's latest earlier item with the same label that the draft does not
--   already carry (so deleting and re-adding an item to change a figure keeps it), else its own
--   id (the trigger below). It is set at insert only.
-- * in_force_from: the month from which an approved version is the baseline its zone's
--   months are measured against (src/domain/history.rs states the rule).
-- cost_items and benefit_drivers are not hash-chained; ledger_entries is not touched.

ALTER TABLE cost_items ADD COLUMN item_uid INTEGER;
ALTER TABLE benefit_drivers ADD COLUMN item_uid INTEGER;
ALTER TABLE case_versions ADD COLUMN in_force_from TEXT
    CHECK (in_force_from IS NULL OR in_force_from GLOB '[0-9][0-9][0-9][0-9]-[0-1][0-9]');

-- The freeze triggers of 0003 refuse any update of an approved version's items, so they are
-- dropped for the backfill and created again exactly as they were.
DROP TRIGGER cost_items_frozen_update;
DROP TRIGGER benefit_drivers_frozen_update;
DROP TRIGGER case_versions_frozen;

-- Existing items: the id of the item with the same label in the zone's earliest version that
-- has it, where the label names one item in each of the two versions; otherwise its own id.
UPDATE cost_items SET item_uid = COALESCE((
    SELECT x.id FROM cost_items x JOIN case_versions xv ON xv.id = x.case_id
    WHERE xv.zone_id = (SELECT zone_id FROM case_versions WHERE id = cost_items.case_id)
      AND x.label = cost_items.label
      AND (SELECT COUNT(*) FROM cost_items y WHERE y.case_id = x.case_id AND y.label = x.label) = 1
      AND (SELECT COUNT(*) FROM cost_items y WHERE y.case_id = cost_items.case_id AND y.label = cost_items.label) = 1
    ORDER BY xv.version, x.id LIMIT 1), id);
UPDATE benefit_drivers SET item_uid = COALESCE((
    SELECT x.id FROM benefit_drivers x JOIN case_versions xv ON xv.id = x.case_id
    WHERE xv.zone_id = (SELECT zone_id FROM case_versions WHERE id = benefit_drivers.case_id)
      AND x.label = benefit_drivers.label
      AND (SELECT COUNT(*) FROM benefit_drivers y WHERE y.case_id = x.case_id AND y.label = x.label) = 1
      AND (SELECT COUNT(*) FROM benefit_drivers y WHERE y.case_id = benefit_drivers.case_id AND y.label = benefit_drivers.label) = 1
    ORDER BY xv.version, x.id LIMIT 1), id);

-- Existing baselines: a version loaded from a scenario file is in force from its start month
-- (the file states it as the baseline of record), one approved in the app from the month of
-- its approval.
UPDATE case_versions
SET in_force_from = CASE WHEN approval_kind = 'scenario' OR approved_at IS NULL THEN start_month
                         ELSE substr(approved_at, 1, 7) END
WHERE state IN ('approved', 'superseded');

CREATE TRIGGER cost_items_frozen_update BEFORE UPDATE ON cost_items
WHEN (SELECT state FROM case_versions WHERE id = OLD.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;
CREATE TRIGGER benefit_drivers_frozen_update BEFORE UPDATE ON benefit_drivers
WHEN (SELECT state FROM case_versions WHERE id = OLD.case_id) IN ('approved', 'superseded')
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen');
END;
-- As in 0008, with in_force_from frozen too.
CREATE TRIGGER case_versions_frozen BEFORE UPDATE ON case_versions
WHEN OLD.state IN ('approved', 'superseded') AND NOT (OLD.state = 'approved' AND NEW.state = 'superseded'
     AND NEW.label = OLD.label AND NEW.horizon_months = OLD.horizon_months AND NEW.start_month = OLD.start_month
     AND NEW.go_live_offset = OLD.go_live_offset AND NEW.ramp_up_months = OLD.ramp_up_months
     AND NEW.success_probability = OLD.success_probability
     AND NEW.approved_at IS OLD.approved_at AND NEW.approved_by IS OLD.approved_by
     AND NEW.approval_kind IS OLD.approval_kind AND NEW.approve_comment IS OLD.approve_comment
     AND NEW.submitted_by IS OLD.submitted_by AND NEW.edited_by IS OLD.edited_by
     AND NEW.frozen_currency IS OLD.frozen_currency AND NEW.frozen_hurdle_rate IS OLD.frozen_hurdle_rate
     AND NEW.frozen_tax_rate IS OLD.frozen_tax_rate
     AND NEW.frozen_depreciation_years IS OLD.frozen_depreciation_years
     AND NEW.in_force_from IS OLD.in_force_from)
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen: save a new scenario version');
END;

-- A new item without an identity is its own; an identity never changes once given.
CREATE TRIGGER cost_items_uid AFTER INSERT ON cost_items
WHEN NEW.item_uid IS NULL
BEGIN
    UPDATE cost_items SET item_uid = NEW.id WHERE id = NEW.id;
END;
CREATE TRIGGER benefit_drivers_uid AFTER INSERT ON benefit_drivers
WHEN NEW.item_uid IS NULL
BEGIN
    UPDATE benefit_drivers SET item_uid = NEW.id WHERE id = NEW.id;
END;
CREATE TRIGGER cost_items_uid_fixed BEFORE UPDATE OF item_uid ON cost_items
WHEN OLD.item_uid IS NOT NULL AND NEW.item_uid IS NOT OLD.item_uid
BEGIN
    SELECT RAISE(ABORT, 'an item keeps its identity across versions');
END;
CREATE TRIGGER benefit_drivers_uid_fixed BEFORE UPDATE OF item_uid ON benefit_drivers
WHEN OLD.item_uid IS NOT NULL AND NEW.item_uid IS NOT OLD.item_uid
BEGIN
    SELECT RAISE(ABORT, 'an item keeps its identity across versions');
END;
-- One item per identity in a version.
CREATE UNIQUE INDEX cost_items_identity ON cost_items (case_id, item_uid);
CREATE UNIQUE INDEX benefit_drivers_identity ON benefit_drivers (case_id, item_uid);
