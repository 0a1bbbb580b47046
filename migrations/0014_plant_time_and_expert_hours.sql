-- The plant's time zone and the expert-time driver's two inputs (issue 13, screens).
-- * site_settings.time_zone: the IANA name (src/domain/local_time.rs checks it against the
--   time zone database bundled with the program); pages show timestamps in its local time,
--   exports keep the stored UTC values. Databases from before this migration show UTC, as
--   they did. Changing it updates site_settings, whose trigger (0005) moves the site counter.
-- * benefit_drivers.hours_spent and hours_multiplier: an expert-time driver estimated as hours
--   spent with the analytics x a multiplier (common practice, an upper bound) keeps both inputs
--   beside the likely quantity computed from them; both NULL for every other driver and every
--   row from before this migration. Decimal text, never REAL.
ALTER TABLE site_settings ADD COLUMN time_zone TEXT NOT NULL DEFAULT 'UTC'
    CHECK (length(time_zone) BETWEEN 1 AND 64);
ALTER TABLE benefit_drivers ADD COLUMN hours_spent TEXT;
ALTER TABLE benefit_drivers ADD COLUMN hours_multiplier TEXT
    CHECK ((hours_spent IS NULL) = (hours_multiplier IS NULL));
