-- Schema version 12: which paired tablet sent each reading (serve --lan), so
-- the laptop's devices page can say how many readings each one sent and the
-- office can spot a tablet that never came back in range. A reading typed on
-- the laptop itself, imported or sent before this version has no row here.
-- Append-only like the readings it points at.

CREATE TABLE reading_devices (
    reading_id  INTEGER PRIMARY KEY REFERENCES readings(id),
    device_id   INTEGER NOT NULL REFERENCES paired_devices(id)
);

CREATE INDEX reading_devices_by_device ON reading_devices(device_id);

CREATE TRIGGER reading_devices_no_update BEFORE UPDATE ON reading_devices
BEGIN SELECT RAISE(ABORT, 'reading_devices are append-only'); END;

CREATE TRIGGER reading_devices_no_delete BEFORE DELETE ON reading_devices
BEGIN SELECT RAISE(ABORT, 'reading_devices are append-only'); END;
