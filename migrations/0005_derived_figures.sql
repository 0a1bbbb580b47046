-- Derived-figure support. The portfolio caches each zone's figures and recomputes a zone only
-- when its counter here has moved; triggers bump the counters in the same transaction as the
-- change itself, so no write path can forget to. `site_changes` covers what every zone depends
-- on (site settings, readiness weights, the set of zones).
-- `ledger_totals` holds each baseline item's booked sums, kept by src/db/ledger.rs in the
-- booking's own transaction (decimal text, summed in Rust: SQL never sums money here).

CREATE TABLE zone_changes (
    zone_id INTEGER PRIMARY KEY REFERENCES zones (id) ON DELETE RESTRICT,
    n       INTEGER NOT NULL
) STRICT;
INSERT INTO zone_changes (zone_id, n) SELECT id, 0 FROM zones;

CREATE TABLE site_changes (
    id INTEGER PRIMARY KEY CHECK (id = 1),
    n  INTEGER NOT NULL
) STRICT;
INSERT INTO site_changes (id, n) VALUES (1, 0);

CREATE TABLE ledger_totals (
    zone_id     INTEGER NOT NULL REFERENCES zones (id) ON DELETE RESTRICT,
    item        TEXT    NOT NULL,  -- 'driver:<id>' or 'cost:<id>'
    amount      TEXT    NOT NULL,
    quantity    TEXT    NOT NULL,
    entries     INTEGER NOT NULL,
    last_period TEXT    NOT NULL,
    PRIMARY KEY (zone_id, item)
) STRICT;

CREATE TRIGGER zones_counted AFTER INSERT ON zones
BEGIN
    INSERT INTO zone_changes (zone_id, n) VALUES (NEW.id, 0);
    UPDATE site_changes SET n = n + 1;
END;

CREATE TRIGGER site_settings_inserted AFTER INSERT ON site_settings
BEGIN
    UPDATE site_changes SET n = n + 1;
END;
CREATE TRIGGER site_settings_updated AFTER UPDATE ON site_settings
BEGIN
    UPDATE site_changes SET n = n + 1;
END;
CREATE TRIGGER readiness_criteria_updated AFTER UPDATE ON readiness_criteria
BEGIN
    UPDATE site_changes SET n = n + 1;
END;

CREATE TRIGGER zones_changed AFTER UPDATE ON zones
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = NEW.id;
END;

CREATE TRIGGER case_versions_insert_counted AFTER INSERT ON case_versions
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = NEW.zone_id;
END;

CREATE TRIGGER cost_items_insert_counted AFTER INSERT ON cost_items
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = (SELECT zone_id FROM case_versions WHERE id = NEW.case_id);
END;

CREATE TRIGGER benefit_drivers_insert_counted AFTER INSERT ON benefit_drivers
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = (SELECT zone_id FROM case_versions WHERE id = NEW.case_id);
END;

CREATE TRIGGER readiness_scores_insert_counted AFTER INSERT ON readiness_scores
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = NEW.zone_id;
END;

CREATE TRIGGER case_versions_update_counted AFTER UPDATE ON case_versions
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = NEW.zone_id;
END;

CREATE TRIGGER cost_items_update_counted AFTER UPDATE ON cost_items
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = (SELECT zone_id FROM case_versions WHERE id = NEW.case_id);
END;

CREATE TRIGGER benefit_drivers_update_counted AFTER UPDATE ON benefit_drivers
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = (SELECT zone_id FROM case_versions WHERE id = NEW.case_id);
END;

CREATE TRIGGER readiness_scores_update_counted AFTER UPDATE ON readiness_scores
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = NEW.zone_id;
END;

CREATE TRIGGER case_versions_delete_counted AFTER DELETE ON case_versions
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = OLD.zone_id;
END;

CREATE TRIGGER cost_items_delete_counted AFTER DELETE ON cost_items
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = (SELECT zone_id FROM case_versions WHERE id = OLD.case_id);
END;

CREATE TRIGGER benefit_drivers_delete_counted AFTER DELETE ON benefit_drivers
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = (SELECT zone_id FROM case_versions WHERE id = OLD.case_id);
END;

CREATE TRIGGER readiness_scores_delete_counted AFTER DELETE ON readiness_scores
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = OLD.zone_id;
END;

CREATE TRIGGER ledger_entries_counted AFTER INSERT ON ledger_entries
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = NEW.zone_id;
END;
