-- Schema version 13 on PostgreSQL: the twin of ../013_reading_devices.sql
-- (which paired tablet sent each reading; append-only).

CREATE TABLE reading_devices (
    reading_id  bigint PRIMARY KEY REFERENCES readings(id),
    device_id   bigint NOT NULL REFERENCES paired_devices(id)
);

CREATE INDEX reading_devices_by_device ON reading_devices(device_id);

CREATE TRIGGER reading_devices_no_update BEFORE UPDATE ON reading_devices FOR EACH ROW
EXECUTE FUNCTION fieldapp_append_only('reading_devices are append-only');
CREATE TRIGGER reading_devices_no_delete BEFORE DELETE ON reading_devices FOR EACH ROW
EXECUTE FUNCTION fieldapp_append_only('reading_devices are append-only');
CREATE TRIGGER reading_devices_no_truncate BEFORE TRUNCATE ON reading_devices FOR EACH STATEMENT
EXECUTE FUNCTION fieldapp_append_only('reading_devices are append-only');
