-- Named roadmap plans (issue 14): each save of a plan's inputs under a name is a new version,
-- with who saved it and when, so a plan shown at a review can be found again unchanged.
-- * name: the plan's name (trimmed, 1 to 80 characters); version: 1, 2, ... per name.
-- * inputs: the plan's inputs as entered (domain::RoadmapQuery as JSON text), read again through
--   RoadmapParams::parse, so a stored version is computed against today's portfolio.
-- * created_at (RFC 3339, from the app's clock) and created_by (the user name).
-- Rows are append-only: triggers refuse UPDATE, DELETE and INSERT OR REPLACE over a version.

CREATE TABLE roadmap_plans (
    id         INTEGER PRIMARY KEY,
    name       TEXT    NOT NULL CHECK (length(name) BETWEEN 1 AND 80),
    version    INTEGER NOT NULL CHECK (version >= 1),
    inputs     TEXT    NOT NULL CHECK (json_valid(inputs)),
    created_at TEXT    NOT NULL,
    created_by TEXT    NOT NULL,
    UNIQUE (name, version)
) STRICT;

CREATE TRIGGER roadmap_plans_no_update BEFORE UPDATE ON roadmap_plans
BEGIN
    SELECT RAISE(ABORT, 'plan versions are append-only: save a new version instead');
END;
CREATE TRIGGER roadmap_plans_no_delete BEFORE DELETE ON roadmap_plans
BEGIN
    SELECT RAISE(ABORT, 'plan versions are append-only: save a new version instead');
END;
CREATE TRIGGER roadmap_plans_no_replace BEFORE INSERT ON roadmap_plans
WHEN EXISTS (SELECT 1 FROM roadmap_plans WHERE id = NEW.id)
    OR EXISTS (SELECT 1 FROM roadmap_plans WHERE name = NEW.name AND version = NEW.version)
BEGIN
    SELECT RAISE(ABORT, 'plan versions are append-only: save a new version instead');
END;
