-- Schema version 6: the history of each site's settings (name, kind, crop,
-- texture, SP, position, notes). One row per setting per change, written in
-- the same transaction as the change itself, creation included. Rows sharing
-- (site_id, change_no) are one change. Append-only, like the readings.
-- action: 'created' (the site was set up), 'changed' (a later edit),
-- 'existing' (the settings a site had when this history began).

CREATE TABLE site_history (
    id          INTEGER PRIMARY KEY,
    site_id     INTEGER NOT NULL REFERENCES sites(id),
    change_no   INTEGER NOT NULL,
    changed_at  TEXT NOT NULL,              -- server clock, UTC ISO 8601
    action      TEXT NOT NULL CHECK (action IN ('created', 'changed', 'existing')),
    field       TEXT NOT NULL,
    old_value   TEXT,                       -- NULL: not set
    new_value   TEXT,
    UNIQUE (site_id, change_no, field)
);
CREATE INDEX site_history_site ON site_history (site_id, change_no);
-- a reading sent under a site's former name (a tablet's queue) finds the site
CREATE INDEX site_history_former_name ON site_history (field, old_value COLLATE NOCASE);

CREATE TRIGGER site_history_no_update BEFORE UPDATE ON site_history
BEGIN SELECT RAISE(ABORT, 'site history is append-only'); END;
CREATE TRIGGER site_history_no_delete BEFORE DELETE ON site_history
BEGIN SELECT RAISE(ABORT, 'site history is append-only'); END;

-- The sites already in the log: their settings as they stand now.
INSERT INTO site_history (site_id, change_no, changed_at, action, field, old_value, new_value)
SELECT id, 1, strftime('%Y-%m-%dT%H:%M:%S+00:00', 'now'), 'existing', f, NULL, v FROM (
    SELECT id, 'name' AS f, name AS v FROM sites
    UNION ALL SELECT id, 'kind', kind FROM sites
    UNION ALL SELECT id, 'crop', crop FROM sites WHERE crop IS NOT NULL AND crop <> ''
    UNION ALL SELECT id, 'texture', texture FROM sites WHERE texture IS NOT NULL AND texture <> ''
    UNION ALL SELECT id, 'sp_pct', CAST(sp_pct AS TEXT) FROM sites WHERE sp_pct IS NOT NULL
    UNION ALL SELECT id, 'latitude', CAST(latitude AS TEXT) FROM sites WHERE latitude IS NOT NULL
    UNION ALL SELECT id, 'longitude', CAST(longitude AS TEXT) FROM sites WHERE longitude IS NOT NULL
    UNION ALL SELECT id, 'notes', notes FROM sites WHERE notes <> ''
);
