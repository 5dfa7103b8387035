-- Schema version 1: sites, visits, readings (append-only), voids.
-- Readings are never updated or deleted: a correction is a new row whose
-- supersedes_id points at the row it replaces; a void is a row in voids.
-- Status (current, corrected, void) is derived, never stored twice.

CREATE TABLE sites (
    id          INTEGER PRIMARY KEY,
    name        TEXT NOT NULL UNIQUE COLLATE NOCASE,
    crop        TEXT,
    latitude    REAL CHECK (latitude IS NULL OR latitude BETWEEN -90 AND 90),
    longitude   REAL CHECK (longitude IS NULL OR longitude BETWEEN -180 AND 180),
    sp_pct      REAL,
    texture     TEXT,
    kind        TEXT NOT NULL DEFAULT 'field',   -- field or greenhouse
    notes       TEXT NOT NULL DEFAULT '',
    created_at  TEXT NOT NULL
);

CREATE TABLE visits (
    id          INTEGER PRIMARY KEY,
    site_id     INTEGER NOT NULL REFERENCES sites(id),
    visit_date  TEXT NOT NULL,          -- local date of the readings, YYYY-MM-DD
    visited_by  TEXT NOT NULL DEFAULT '',
    UNIQUE (site_id, visit_date, visited_by)
);

CREATE TABLE readings (
    id                  INTEGER PRIMARY KEY,
    uuid                TEXT NOT NULL UNIQUE,
    site_id             INTEGER NOT NULL REFERENCES sites(id),
    visit_id            INTEGER NOT NULL REFERENCES visits(id),
    supersedes_id       INTEGER UNIQUE REFERENCES readings(id),
    -- as entered
    sample              TEXT NOT NULL,
    depth_cm            REAL,
    value               REAL NOT NULL,
    unit                TEXT NOT NULL,          -- exactly as the meter displayed it
    temp_c              REAL,
    compensated         INTEGER NOT NULL DEFAULT 0,
    ratio               TEXT,
    sp_pct              REAL,
    texture             TEXT,
    tds_factor          REAL,
    theta_g_pct         REAL,
    matric_MPa          REAL,
    meter               TEXT,
    replicate_group     TEXT,
    note                TEXT NOT NULL DEFAULT '',
    taken_at            TEXT NOT NULL,          -- ISO 8601 with UTC offset
    recorded_at         TEXT NOT NULL,          -- server clock, UTC
    -- as computed (science.convert), with the method that made each number
    ec25_dS_m           REAL,
    ece_dS_m            REAL,
    ece_method          TEXT,
    psi_s_MPa           REAL,
    psi_s_method        TEXT,
    flags               TEXT NOT NULL DEFAULT '',  -- flag codes joined by ';'
    result_json         TEXT NOT NULL,              -- the whole conversion result
    app_version         TEXT NOT NULL
);
CREATE INDEX readings_site_taken ON readings (site_id, taken_at);
CREATE INDEX readings_visit ON readings (visit_id);

CREATE TABLE voids (
    id          INTEGER PRIMARY KEY,
    reading_id  INTEGER NOT NULL UNIQUE REFERENCES readings(id),
    reason      TEXT NOT NULL,
    voided_at   TEXT NOT NULL
);

CREATE TRIGGER readings_no_update BEFORE UPDATE ON readings
BEGIN SELECT RAISE(ABORT, 'readings are append-only: record a correction instead'); END;
CREATE TRIGGER readings_no_delete BEFORE DELETE ON readings
BEGIN SELECT RAISE(ABORT, 'readings are append-only: void the reading instead'); END;
CREATE TRIGGER voids_no_change BEFORE UPDATE ON voids
BEGIN SELECT RAISE(ABORT, 'voids are append-only'); END;
CREATE TRIGGER voids_no_delete BEFORE DELETE ON voids
BEGIN SELECT RAISE(ABORT, 'voids are append-only'); END;

CREATE VIEW reading_status AS
SELECT r.id,
       CASE WHEN v.id IS NOT NULL THEN 'void'
            WHEN n.id IS NOT NULL THEN 'corrected'
            ELSE 'current' END AS status,
       v.reason AS void_reason,
       n.uuid AS corrected_by_uuid
FROM readings r
LEFT JOIN voids v ON v.reading_id = r.id
LEFT JOIN readings n ON n.supersedes_id = r.id;
