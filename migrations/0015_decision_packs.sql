-- Decision packs (issue 13): a dated, stored snapshot of a case version (for the capital
-- committee) or of the portfolio (a quarterly review), so a pack can be reprinted unchanged
-- after later bookings, approvals or setting changes.
-- * kind: 'case' (subject: the case version id) or 'portfolio' (subject: the quarter, "2026-Q4").
-- * made_at (RFC 3339, from the app's clock) and made_by (the user name).
-- * The database state the pack was made from: the ledger chain's tip (id and hash; 0 and
--   NULL on an empty ledger), the number of ledger entries, and db::generation (the sum of the
--   change counters of migration 0005).
-- * body: the whole self-contained HTML document (styles inline, charts as inline SVG),
--   served byte for byte; figures: a JSON of its figures (the next portfolio pack compares
--   with the previous one's).
-- * sha256: hex SHA-256 of the pack's content (domain::pack::pack_hash), checked by `verify`.
-- Rows are append-only: triggers refuse UPDATE, DELETE and INSERT OR REPLACE over a pack.

CREATE TABLE decision_packs (
    id              INTEGER PRIMARY KEY,
    kind            TEXT    NOT NULL CHECK (kind IN ('case', 'portfolio')),
    subject         TEXT    NOT NULL CHECK (length(subject) > 0),
    title           TEXT    NOT NULL,
    made_at         TEXT    NOT NULL,
    made_by         TEXT    NOT NULL,
    ledger_tip_id   INTEGER NOT NULL,
    ledger_tip_hash TEXT,
    ledger_entries  INTEGER NOT NULL,
    generation      INTEGER NOT NULL,
    body            TEXT    NOT NULL,
    figures         TEXT    NOT NULL,
    sha256          TEXT    NOT NULL
) STRICT;
CREATE INDEX decision_packs_subject ON decision_packs (kind, subject, id);

CREATE TRIGGER decision_packs_no_update BEFORE UPDATE ON decision_packs
BEGIN
    SELECT RAISE(ABORT, 'decision packs are append-only: make a new pack instead');
END;
CREATE TRIGGER decision_packs_no_delete BEFORE DELETE ON decision_packs
BEGIN
    SELECT RAISE(ABORT, 'decision packs are append-only: make a new pack instead');
END;
CREATE TRIGGER decision_packs_no_replace BEFORE INSERT ON decision_packs
WHEN EXISTS (SELECT 1 FROM decision_packs WHERE id = NEW.id)
BEGIN
    SELECT RAISE(ABORT, 'decision packs are append-only: make a new pack instead');
END;
