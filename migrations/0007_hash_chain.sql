-- Tamper evidence (issue 11, point 6).
-- * `hash` on ledger_entries and audit_log: SHA-256 over the row's canonical content and the
--   previous row's hash, one chain per table in id order, computed in Rust inside the write
--   transaction (src/domain/chain.rs). Rows written before this migration read NULL and are
--   sealed once at start-up (src/db/chain.rs `seal`); after that every row carries a hash.
-- * INSERT OR REPLACE deletes the conflicting row without firing DELETE triggers unless
--   recursive_triggers is on (sqlite.org/lang_conflict.html, REPLACE), so BEFORE INSERT
--   triggers refuse any insert that would replace an existing row of an append-only table.
-- * Users are deactivated, never deleted, and their ids are never reused (`user_ids` keeps the
--   highest id ever given, so a user removed behind the app's back cannot hand their id, and
--   the tokens and sessions still pointing at it, to the next user created).
-- * ledger_totals change only by bookings: never deleted or replaced, and an update must add
--   entries. `verify` and the start-up check compare them with the entries.

ALTER TABLE ledger_entries ADD COLUMN hash TEXT CHECK (hash IS NULL OR length(hash) = 64);
ALTER TABLE audit_log ADD COLUMN hash TEXT CHECK (hash IS NULL OR length(hash) = 64);

-- New rows arrive with their hash; only the seal may give an older row its hash, once.
CREATE TRIGGER ledger_entries_chained BEFORE INSERT ON ledger_entries
WHEN NEW.hash IS NULL
BEGIN
    SELECT RAISE(ABORT, 'ledger entries are hash-chained: book through pilot-ledger');
END;
DROP TRIGGER ledger_entries_no_update;
CREATE TRIGGER ledger_entries_no_update BEFORE UPDATE ON ledger_entries
WHEN OLD.hash IS NOT NULL OR NEW.hash IS NULL
     OR NEW.id IS NOT OLD.id OR NEW.zone_id IS NOT OLD.zone_id OR NEW.case_id IS NOT OLD.case_id
     OR NEW.kind IS NOT OLD.kind OR NEW.driver_id IS NOT OLD.driver_id OR NEW.cost_id IS NOT OLD.cost_id
     OR NEW.period IS NOT OLD.period OR NEW.method IS NOT OLD.method OR NEW.quantity IS NOT OLD.quantity
     OR NEW.unit_value IS NOT OLD.unit_value OR NEW.amount IS NOT OLD.amount
     OR NEW.baseline_intensity IS NOT OLD.baseline_intensity OR NEW.reporting_volume IS NOT OLD.reporting_volume
     OR NEW.measured_consumption IS NOT OLD.measured_consumption OR NEW.evidence IS NOT OLD.evidence
     OR NEW.reverses_id IS NOT OLD.reverses_id OR NEW.idempotency_key IS NOT OLD.idempotency_key
     OR NEW.import_id IS NOT OLD.import_id OR NEW.booked_at IS NOT OLD.booked_at OR NEW.booked_by IS NOT OLD.booked_by
BEGIN
    SELECT RAISE(ABORT, 'ledger entries are append-only: book a reversing entry instead');
END;
CREATE TRIGGER ledger_entries_no_replace BEFORE INSERT ON ledger_entries
WHEN EXISTS (SELECT 1 FROM ledger_entries WHERE id = NEW.id)
BEGIN
    SELECT RAISE(ABORT, 'ledger entries are append-only: an existing entry cannot be replaced');
END;
CREATE TRIGGER ledger_entries_no_replace_reversal BEFORE INSERT ON ledger_entries
WHEN NEW.reverses_id IS NOT NULL AND EXISTS (SELECT 1 FROM ledger_entries WHERE reverses_id = NEW.reverses_id)
BEGIN
    SELECT RAISE(ABORT, 'this entry has already been reversed');
END;
CREATE TRIGGER ledger_entries_no_replace_key BEFORE INSERT ON ledger_entries
WHEN NEW.idempotency_key IS NOT NULL AND EXISTS (SELECT 1 FROM ledger_entries WHERE idempotency_key = NEW.idempotency_key)
BEGIN
    SELECT RAISE(ABORT, 'ledger entries are append-only: this idempotency key has booked an entry already');
END;

CREATE TRIGGER audit_log_chained BEFORE INSERT ON audit_log
WHEN NEW.hash IS NULL
BEGIN
    SELECT RAISE(ABORT, 'audit rows are hash-chained: write them through pilot-ledger');
END;
DROP TRIGGER audit_log_no_update;
CREATE TRIGGER audit_log_no_update BEFORE UPDATE ON audit_log
WHEN OLD.hash IS NOT NULL OR NEW.hash IS NULL
     OR NEW.id IS NOT OLD.id OR NEW.at IS NOT OLD.at OR NEW.actor IS NOT OLD.actor
     OR NEW.action IS NOT OLD.action OR NEW.subject IS NOT OLD.subject OR NEW.detail IS NOT OLD.detail
BEGIN
    SELECT RAISE(ABORT, 'the audit trail is append-only');
END;
CREATE TRIGGER audit_log_no_replace BEFORE INSERT ON audit_log
WHEN EXISTS (SELECT 1 FROM audit_log WHERE id = NEW.id)
BEGIN
    SELECT RAISE(ABORT, 'the audit trail is append-only: an existing row cannot be replaced');
END;

CREATE TRIGGER ledger_imports_no_replace BEFORE INSERT ON ledger_imports
WHEN EXISTS (SELECT 1 FROM ledger_imports WHERE id = NEW.id OR content_hash = NEW.content_hash)
BEGIN
    SELECT RAISE(ABORT, 'imports are append-only: an existing import cannot be replaced');
END;

CREATE TRIGGER ledger_totals_no_replace BEFORE INSERT ON ledger_totals
WHEN EXISTS (SELECT 1 FROM ledger_totals WHERE zone_id = NEW.zone_id AND item = NEW.item)
BEGIN
    SELECT RAISE(ABORT, 'ledger totals are kept by bookings: an existing row cannot be replaced');
END;
CREATE TRIGGER ledger_totals_only_grow BEFORE UPDATE ON ledger_totals
WHEN NEW.entries <= OLD.entries OR NEW.zone_id IS NOT OLD.zone_id OR NEW.item IS NOT OLD.item
BEGIN
    SELECT RAISE(ABORT, 'ledger totals change only with new bookings');
END;
CREATE TRIGGER ledger_totals_no_delete BEFORE DELETE ON ledger_totals
BEGIN
    SELECT RAISE(ABORT, 'ledger totals change only with new bookings');
END;

CREATE TRIGGER users_no_delete BEFORE DELETE ON users
BEGIN
    SELECT RAISE(ABORT, 'users are deactivated, not deleted');
END;
CREATE TRIGGER users_no_replace BEFORE INSERT ON users
WHEN EXISTS (SELECT 1 FROM users WHERE id = NEW.id OR name = NEW.name)
BEGIN
    SELECT RAISE(ABORT, 'a user with this name already exists');
END;
CREATE TABLE user_ids (
    id   INTEGER PRIMARY KEY CHECK (id = 1),
    last INTEGER NOT NULL
) STRICT;
INSERT INTO user_ids (id, last) SELECT 1, COALESCE(MAX(id), 0) FROM users;
CREATE TRIGGER users_ids_never_reused AFTER INSERT ON users
BEGIN
    SELECT RAISE(ABORT, 'user ids are never reused') WHERE NEW.id <= (SELECT last FROM user_ids);
    UPDATE user_ids SET last = NEW.id;
END;
CREATE TRIGGER user_ids_only_grow BEFORE UPDATE ON user_ids
WHEN NEW.last < OLD.last
BEGIN
    SELECT RAISE(ABORT, 'user ids are never reused');
END;
CREATE TRIGGER user_ids_no_delete BEFORE DELETE ON user_ids
BEGIN
    SELECT RAISE(ABORT, 'user ids are never reused');
END;
