-- The site's number format: how forms, CSV files and scenario files are read and how pages and
-- CSV exports write numbers (src/domain/numbers.rs). Changing it updates site_settings, whose
-- trigger (0005) moves the site counter, so no cached page or export keeps the old format.
ALTER TABLE site_settings ADD COLUMN number_format TEXT NOT NULL DEFAULT 'decimal_point'
    CHECK (number_format IN ('decimal_point', 'decimal_comma'));
