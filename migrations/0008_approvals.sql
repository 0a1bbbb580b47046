-- Approval with four eyes, settings frozen at approval, and a zone lifecycle that only moves
-- forward. The rules live in src/domain/approval.rs and src/db/cases.rs; the triggers here are
-- the database's own guard against a write path that forgets them.

-- Who last changed a version's content (header or items): state moves do not count, so a
-- reviewer who returned a version does not become its editor.
ALTER TABLE case_versions ADD COLUMN edited_at TEXT;
ALTER TABLE case_versions ADD COLUMN edited_by TEXT;
-- The latest submission, approval and return, each with who, when and the comment.
ALTER TABLE case_versions ADD COLUMN submitted_at TEXT;
ALTER TABLE case_versions ADD COLUMN submitted_by TEXT;
ALTER TABLE case_versions ADD COLUMN submit_comment TEXT NOT NULL DEFAULT '';
ALTER TABLE case_versions ADD COLUMN approve_comment TEXT NOT NULL DEFAULT '';
-- second_person: four eyes; one_person: the site allowed self-approval; scenario: loaded from
-- a scenario file by its loader.
ALTER TABLE case_versions ADD COLUMN approval_kind TEXT
    CHECK (approval_kind IS NULL OR approval_kind IN ('second_person', 'one_person', 'scenario'));
ALTER TABLE case_versions ADD COLUMN returned_at TEXT;
ALTER TABLE case_versions ADD COLUMN returned_by TEXT;
ALTER TABLE case_versions ADD COLUMN return_comment TEXT NOT NULL DEFAULT '';
-- The site settings in force when the version was approved; its figures keep using them.
ALTER TABLE case_versions ADD COLUMN frozen_currency TEXT;
ALTER TABLE case_versions ADD COLUMN frozen_hurdle_rate TEXT;
ALTER TABLE case_versions ADD COLUMN frozen_tax_rate TEXT;
ALTER TABLE case_versions ADD COLUMN frozen_depreciation_years INTEGER;

-- A small plant may let one person submit and approve (off by default).
ALTER TABLE site_settings ADD COLUMN one_person_approval INTEGER NOT NULL DEFAULT 0
    CHECK (one_person_approval IN (0, 1));

-- Fill the new columns of existing versions. The freeze trigger of 0003 refuses any update of
-- an approved row, so it is replaced by one that also covers the new columns.
DROP TRIGGER case_versions_frozen;

UPDATE case_versions SET edited_at = updated_at, edited_by = updated_by;
-- Versions approved before this migration keep the settings of today, the best record there
-- is; a self-approval under the old rules is marked as one.
UPDATE case_versions
SET frozen_currency = (SELECT currency FROM site_settings WHERE id = 1),
    frozen_hurdle_rate = (SELECT hurdle_rate FROM site_settings WHERE id = 1),
    frozen_tax_rate = (SELECT tax_rate FROM site_settings WHERE id = 1),
    frozen_depreciation_years = (SELECT depreciation_years FROM site_settings WHERE id = 1),
    approval_kind = CASE WHEN approved_by IS NOT NULL AND approved_by = created_by THEN 'one_person' ELSE 'second_person' END
WHERE state IN ('approved', 'superseded');

-- An approved or superseded version is frozen, approval record included: of its own row only
-- the move from approved to superseded is allowed.
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
     AND NEW.frozen_depreciation_years IS OLD.frozen_depreciation_years)
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen: save a new scenario version');
END;

-- Four eyes: a second-person approval by the submitter or the last editor is refused.
CREATE TRIGGER case_versions_four_eyes BEFORE UPDATE OF state ON case_versions
WHEN NEW.state = 'approved' AND OLD.state <> 'approved'
     AND (NEW.approval_kind IS NULL
          OR (NEW.approval_kind = 'second_person'
              AND (NEW.approved_by IS OLD.submitted_by OR NEW.approved_by IS OLD.edited_by)))
BEGIN
    SELECT RAISE(ABORT, 'four eyes: whoever submitted or last edited a version cannot approve it');
END;

-- A zone with booked money never returns to candidate.
CREATE TRIGGER zones_booked_never_candidate BEFORE UPDATE OF status ON zones
WHEN NEW.status = 'candidate' AND OLD.status <> 'candidate'
     AND EXISTS (SELECT 1 FROM ledger_entries WHERE zone_id = NEW.id)
BEGIN
    SELECT RAISE(ABORT, 'a zone with booked money never returns to candidate');
END;
