-- The roadmap's data on zones and on the site (issue 14).
-- * zones.area: the part of the plant a zone belongs to ("press shop"); empty for none. The
--   roadmap's option "one introduction at a time per area" groups zones by it.
-- * zone_needs: zone `zone_id` needs zone `needs_id` live before it starts. Both name zones
--   (never deleted); a zone never needs itself (CHECK), and src/db/zones.rs refuses unknown
--   codes and cycles before writing. Rows are replaced whole when a zone's needs change, with
--   who wrote them; a change moves the zone's counter (0005) like any change of the zone.
-- * site_settings.introduction_capacity: introductions at a time, at most this many zones
--   inside their introduction window in any month (1 to 20; 2 for databases from before).
ALTER TABLE zones ADD COLUMN area TEXT NOT NULL DEFAULT '' CHECK (length(area) <= 60);

CREATE TABLE zone_needs (
    zone_id    INTEGER NOT NULL REFERENCES zones (id) ON DELETE RESTRICT,
    needs_id   INTEGER NOT NULL REFERENCES zones (id) ON DELETE RESTRICT,
    created_at TEXT    NOT NULL,
    created_by TEXT    NOT NULL,
    PRIMARY KEY (zone_id, needs_id),
    CHECK (zone_id <> needs_id)
) STRICT;
CREATE INDEX zone_needs_needed ON zone_needs (needs_id);

CREATE TRIGGER zone_needs_insert_counted AFTER INSERT ON zone_needs
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = NEW.zone_id;
END;
CREATE TRIGGER zone_needs_delete_counted AFTER DELETE ON zone_needs
BEGIN
    UPDATE zone_changes SET n = n + 1 WHERE zone_id = OLD.zone_id;
END;

ALTER TABLE site_settings ADD COLUMN introduction_capacity INTEGER NOT NULL DEFAULT 2
    CHECK (introduction_capacity BETWEEN 1 AND 20);
