-- Schema version 18 (PostgreSQL, the same as ../018_sync_indexes.sql): a pull walks one site's readings, voids and settings
-- changes in id order from the device's cursor; these indexes keep each
-- batch a short range scan however long the office log grows.
CREATE INDEX readings_site_id ON readings (site_id, id);
CREATE INDEX site_history_site_id ON site_history (site_id, id);
CREATE INDEX calibrations_meter_checked ON calibrations (meter_id, checked_at, standard);
