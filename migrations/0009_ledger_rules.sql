-- Ledger rules that do what they say (issue 11, point 5).

-- A booking far outside its item's expectation is kept only when its author confirmed it
-- (1 = the entry exceeds the plausibility threshold and was confirmed explicitly; NULL: not
-- needed). Nullable without a default, as every column added to a hash-chained table must be
-- (migration 0007): older rows then keep the hashes they were sealed with.
ALTER TABLE ledger_entries ADD COLUMN implausible_confirmed INTEGER
    CHECK (implausible_confirmed IS NULL OR implausible_confirmed = 1);
-- The day a spending entry was paid, inside its booked month; NULL: the month's end.
ALTER TABLE ledger_entries ADD COLUMN paid_on TEXT
    CHECK (paid_on IS NULL OR (kind = 'spending' AND substr(paid_on, 1, 7) = period
           AND paid_on GLOB '[0-9][0-9][0-9][0-9]-[0-1][0-9]-[0-3][0-9]'));

-- An Idempotency-Key belongs to its user; the fingerprint (SHA-256 of method, path and the
-- canonical body) tells a retry from a different request reusing the key. Keys stored on
-- ledger_entries before this migration ('<user name>:<key>') are carried over without a
-- fingerprint (they replay as before); new entries leave ledger_entries.idempotency_key NULL.
CREATE TABLE idempotency_keys (
    user_id     INTEGER NOT NULL REFERENCES users (id),
    key         TEXT    NOT NULL,
    fingerprint TEXT,
    entry_id    INTEGER NOT NULL REFERENCES ledger_entries (id),
    used_at     TEXT    NOT NULL,
    PRIMARY KEY (user_id, key)
) STRICT;
INSERT OR IGNORE INTO idempotency_keys (user_id, key, fingerprint, entry_id, used_at)
SELECT u.id, substr(e.idempotency_key, length(u.name) + 2), NULL, e.id, e.booked_at
FROM ledger_entries e JOIN users u ON substr(e.idempotency_key, 1, length(u.name) + 1) = u.name || ':'
WHERE e.idempotency_key IS NOT NULL;

-- One-time tokens of the booking, reversal and import forms, recorded in the transaction that
-- books the form: a second submit of the same token books nothing and shows the first outcome.
CREATE TABLE form_submissions (
    token   TEXT    PRIMARY KEY,
    user_id INTEGER NOT NULL REFERENCES users (id),
    outcome TEXT    NOT NULL CHECK (outcome GLOB 'entry [0-9]*' OR outcome GLOB 'import [0-9]*'),
    used_at TEXT    NOT NULL
) STRICT;

-- A CSV file is identified by its rows (rows_hash: line ends, spaces around cells, the final
-- newline and column order normalised). content_hash stays UNIQUE (SQLite cannot drop the
-- constraint without rebuilding the table): a deliberate repeat (repeats_import_id set)
-- stores it with a '+repeat-<n>' suffix.
ALTER TABLE ledger_imports ADD COLUMN rows_hash TEXT;
ALTER TABLE ledger_imports ADD COLUMN repeats_import_id INTEGER REFERENCES ledger_imports (id);
CREATE INDEX ledger_imports_rows ON ledger_imports (rows_hash);

CREATE TRIGGER idempotency_keys_no_update BEFORE UPDATE ON idempotency_keys
BEGIN
    SELECT RAISE(ABORT, 'idempotency keys are append-only');
END;
CREATE TRIGGER idempotency_keys_no_delete BEFORE DELETE ON idempotency_keys
BEGIN
    SELECT RAISE(ABORT, 'idempotency keys are append-only');
END;
CREATE TRIGGER form_submissions_no_update BEFORE UPDATE ON form_submissions
BEGIN
    SELECT RAISE(ABORT, 'form submissions are append-only');
END;
CREATE TRIGGER form_submissions_no_delete BEFORE DELETE ON form_submissions
BEGIN
    SELECT RAISE(ABORT, 'form submissions are append-only');
END;
