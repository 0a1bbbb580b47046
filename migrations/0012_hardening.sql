-- Hardening after review (issue 11).

-- INSERT OR REPLACE deletes the conflicting row without firing DELETE triggers (migration
-- 0007), so every table whose rows are append-only or frozen refuses an insert over an existing
-- key. A REPLACE over an approved case version would rewrite its frozen settings and approval.
-- Readiness scores and criteria are edited in place (an upsert), so they are not guarded here.
CREATE TRIGGER idempotency_keys_no_replace BEFORE INSERT ON idempotency_keys
WHEN EXISTS (SELECT 1 FROM idempotency_keys WHERE user_id = NEW.user_id AND key = NEW.key)
BEGIN
    SELECT RAISE(ABORT, 'idempotency keys are append-only: an existing key cannot be replaced');
END;
CREATE TRIGGER form_submissions_no_replace BEFORE INSERT ON form_submissions
WHEN EXISTS (SELECT 1 FROM form_submissions WHERE token = NEW.token)
BEGIN
    SELECT RAISE(ABORT, 'form submissions are append-only: an existing token cannot be replaced');
END;
CREATE TRIGGER user_ids_no_replace BEFORE INSERT ON user_ids
WHEN EXISTS (SELECT 1 FROM user_ids)
BEGIN
    SELECT RAISE(ABORT, 'user ids are never reused');
END;
CREATE TRIGGER case_versions_no_replace BEFORE INSERT ON case_versions
WHEN EXISTS (SELECT 1 FROM case_versions WHERE id = NEW.id OR (zone_id = NEW.zone_id AND version = NEW.version))
BEGIN
    SELECT RAISE(ABORT, 'case versions cannot be replaced: save a new scenario version');
END;
CREATE TRIGGER cost_items_no_replace BEFORE INSERT ON cost_items
WHEN EXISTS (SELECT 1 FROM cost_items WHERE id = NEW.id)
BEGIN
    SELECT RAISE(ABORT, 'cost items cannot be replaced: add a new item');
END;
CREATE TRIGGER benefit_drivers_no_replace BEFORE INSERT ON benefit_drivers
WHEN EXISTS (SELECT 1 FROM benefit_drivers WHERE id = NEW.id)
BEGIN
    SELECT RAISE(ABORT, 'benefit drivers cannot be replaced: add a new driver');
END;

-- User ids after an upgrade: 0007 seeded user_ids.last from the users left, but a release
-- before it let users be deleted behind the app's back, leaving their tokens and sessions. The
-- next id given must lie above every id those still name, and they stop working now.
UPDATE user_ids SET last = max(last,
    COALESCE((SELECT MAX(user_id) FROM api_tokens), 0),
    COALESCE((SELECT MAX(user_id) FROM sessions), 0));
UPDATE api_tokens SET revoked_at = strftime('%Y-%m-%dT%H:%M:%SZ', 'now'), revoked_by = 'migration 0012'
WHERE revoked_at IS NULL AND user_id NOT IN (SELECT id FROM users);
DELETE FROM sessions WHERE user_id NOT IN (SELECT id FROM users);

-- A zone with an approved baseline never returns to candidate either (0008 covers booked money).
CREATE TRIGGER zones_baseline_never_candidate BEFORE UPDATE OF status ON zones
WHEN NEW.status = 'candidate' AND OLD.status <> 'candidate'
     AND EXISTS (SELECT 1 FROM case_versions WHERE zone_id = NEW.id AND state = 'approved')
BEGIN
    SELECT RAISE(ABORT, 'a zone with an approved baseline never returns to candidate');
END;

-- A one-time form token belongs to the user and the zone whose page it came from; rows from
-- before this migration read NULL (the user alone is compared).
ALTER TABLE form_submissions ADD COLUMN zone_id INTEGER REFERENCES zones (id);

-- Four eyes over everyone who edited a version, not only the last editor: `editors` lists the
-- names (one per line, between newlines) of all who changed its content since it was created.
-- Versions still open start with their last editor, the best record there is; approved ones
-- are frozen and keep an empty list.
ALTER TABLE case_versions ADD COLUMN editors TEXT NOT NULL DEFAULT '';
UPDATE case_versions SET editors = char(10) || edited_by || char(10)
WHERE state IN ('draft', 'submitted') AND edited_by IS NOT NULL;
CREATE TRIGGER case_versions_editors_frozen BEFORE UPDATE OF editors ON case_versions
WHEN OLD.state IN ('approved', 'superseded') AND NEW.editors IS NOT OLD.editors
BEGIN
    SELECT RAISE(ABORT, 'an approved business case is frozen: save a new scenario version');
END;
CREATE TRIGGER case_versions_four_eyes_editors BEFORE UPDATE OF state ON case_versions
WHEN NEW.state = 'approved' AND OLD.state <> 'approved' AND NEW.approval_kind = 'second_person'
     AND instr(lower(OLD.editors), lower(char(10) || NEW.approved_by || char(10))) > 0
BEGIN
    SELECT RAISE(ABORT, 'four eyes: whoever edited a version cannot approve it');
END;
