-- Schema version 2: meter profiles, calibration checks, flag acknowledgements.

CREATE TABLE meters (
    id              INTEGER PRIMARY KEY,
    name            TEXT NOT NULL UNIQUE COLLATE NOCASE,
    units           TEXT NOT NULL,          -- display units, ';'-separated, canonical spelling
    ranges_json     TEXT NOT NULL,          -- [{"unit", "min", "max", "resolution"}], one per range
    accuracy_pct    REAL,                   -- stated accuracy, % of reading
    atc             INTEGER NOT NULL DEFAULT 0,
    atc_coeff_pct   REAL,                   -- % per °C, when the meter compensates linearly
    ref_temp_c      REAL NOT NULL DEFAULT 25,
    atc_min_c       REAL,                   -- compensation range of the meter
    atc_max_c       REAL,
    tds_factor      REAL,                   -- EC-to-TDS factor of a TDS meter
    notes           TEXT NOT NULL DEFAULT '',
    created_at      TEXT NOT NULL
);

CREATE TABLE calibrations (
    id              INTEGER PRIMARY KEY,
    meter_id        INTEGER NOT NULL REFERENCES meters(id),
    standard        TEXT NOT NULL,          -- 'kcl_0.01' or a user-defined label
    standard_uS_cm  REAL,                   -- nominal value at 25 °C for a user-defined standard
    value           REAL NOT NULL,
    unit            TEXT NOT NULL,
    temp_c          REAL,
    compensated     INTEGER NOT NULL DEFAULT 1,
    expected_uS_cm  REAL NOT NULL,
    measured_uS_cm  REAL NOT NULL,
    deviation_pct   REAL NOT NULL,
    tolerance_pct   REAL NOT NULL,
    passed          INTEGER NOT NULL,
    checked_at      TEXT NOT NULL,
    note            TEXT NOT NULL DEFAULT ''
);
CREATE INDEX calibrations_meter ON calibrations (meter_id, checked_at);

CREATE TABLE flag_acks (
    id          INTEGER PRIMARY KEY,
    reading_id  INTEGER NOT NULL REFERENCES readings(id),
    code        TEXT NOT NULL,
    note        TEXT NOT NULL DEFAULT '',
    acked_at    TEXT NOT NULL,
    UNIQUE (reading_id, code)
);

CREATE TRIGGER calibrations_no_update BEFORE UPDATE ON calibrations
BEGIN SELECT RAISE(ABORT, 'calibration checks are append-only'); END;
CREATE TRIGGER calibrations_no_delete BEFORE DELETE ON calibrations
BEGIN SELECT RAISE(ABORT, 'calibration checks are append-only'); END;
