-- Schema version 12: a long import is converted and staged in chunks, each
-- its own short transaction, then moved into readings in one short final
-- transaction (csvio.import_rows). A job is named by the digest of the rows
-- it adds; a run killed midway leaves its staged chunks, and the next run of
-- the same file carries on from there. Nothing staged is a reading until the
-- final transaction commits, so each file still lands whole or not at all.
CREATE TABLE import_jobs (
    id           INTEGER PRIMARY KEY,
    digest       TEXT NOT NULL UNIQUE,      -- SHA-256 of the new rows, in order
    rows_total   INTEGER NOT NULL,
    rows_staged  INTEGER NOT NULL DEFAULT 0,
    started_at   TEXT NOT NULL
);

CREATE TABLE import_staging (
    job_id          INTEGER NOT NULL REFERENCES import_jobs(id),
    seq             INTEGER NOT NULL,        -- position in the import order
    depth           INTEGER NOT NULL,        -- 0 = corrects nothing in this file
    site            TEXT NOT NULL,
    visited_by      TEXT NOT NULL DEFAULT '',
    supersedes_uuid TEXT,
    uuid TEXT NOT NULL, sample TEXT NOT NULL, depth_cm REAL, value REAL NOT NULL,
    unit TEXT NOT NULL, temp_c REAL, compensated INTEGER NOT NULL, ratio TEXT, sp_pct REAL,
    texture TEXT, tds_factor REAL, theta_g_pct REAL, matric_MPa REAL, meter TEXT,
    replicate_group TEXT, note TEXT NOT NULL, taken_at TEXT NOT NULL, ec25_dS_m REAL,
    ece_dS_m REAL, ece_method TEXT, psi_s_MPa REAL, psi_s_method TEXT, flags TEXT NOT NULL,
    result_json TEXT NOT NULL, app_version TEXT NOT NULL, recorded_at TEXT,
    PRIMARY KEY (job_id, seq)
);
