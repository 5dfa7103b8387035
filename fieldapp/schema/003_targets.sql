-- Schema version 3: the user's own target ranges per crop (site views).
-- One range per crop and measure (feed, leachate, sme, media, water, drain, ece);
-- saving again replaces it. lo or hi may be NULL (no limit on that side).

CREATE TABLE targets (
    id          INTEGER PRIMARY KEY,
    crop        TEXT NOT NULL COLLATE NOCASE,   -- crop name as in crops.csv
    measure     TEXT NOT NULL,
    lo_dS_m     REAL,
    hi_dS_m     REAL,
    note        TEXT NOT NULL DEFAULT '',
    updated_at  TEXT NOT NULL,
    UNIQUE (crop, measure),
    CHECK (lo_dS_m IS NOT NULL OR hi_dS_m IS NOT NULL),
    CHECK (lo_dS_m IS NULL OR hi_dS_m IS NULL OR hi_dS_m > lo_dS_m)
);
