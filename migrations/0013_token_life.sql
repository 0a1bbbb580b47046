-- Tokens with a life (issue 12, point 3).
-- * api_tokens.expires_at (RFC 3339): chosen when the token is made (90 days unless the maker
--   chooses 1 to 365). A token without one is refused (the app fails closed; the trigger
--   below keeps new tokens from arriving without one). Tokens made before this migration never
--   expired: they get 90 days from the migration, time to replace them.
-- * api_tokens.last_used_at (RFC 3339): the last request the token authenticated, written at
--   most once a minute; NULL: not used since this migration.
-- * Who issued a token is its existing created_by. When that is not the owner, every ledger
--   entry the token books, reverses or imports carries the issuer's name in
--   ledger_entries.on_behalf_by ("booked by <issuer> on behalf of <owner>"). The column is
--   nullable without a DEFAULT, as every column added to a hash-chained table must be
--   (migration 0007): older rows read NULL, which the chain's encoding leaves out, so their
--   stored hashes still verify; new rows hash it when it is set.

ALTER TABLE api_tokens ADD COLUMN expires_at TEXT;
ALTER TABLE api_tokens ADD COLUMN last_used_at TEXT;
UPDATE api_tokens SET expires_at = strftime('%Y-%m-%dT%H:%M:%SZ', 'now', '+90 days');
CREATE TRIGGER api_tokens_expire BEFORE INSERT ON api_tokens
WHEN NEW.expires_at IS NULL
BEGIN
    SELECT RAISE(ABORT, 'an API token needs an expiry');
END;

ALTER TABLE ledger_entries ADD COLUMN on_behalf_by TEXT CHECK (on_behalf_by IS NULL OR length(on_behalf_by) > 0);

-- As in 0007, with the columns added since (paid_on, implausible_confirmed in 0009, and
-- on_behalf_by) named too: the one-time seal of a row written before 0007 may set its hash
-- and nothing else.
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
     OR NEW.paid_on IS NOT OLD.paid_on OR NEW.implausible_confirmed IS NOT OLD.implausible_confirmed
     OR NEW.on_behalf_by IS NOT OLD.on_behalf_by
BEGIN
    SELECT RAISE(ABORT, 'ledger entries are append-only: book a reversing entry instead');
END;
