-- Schema version 17: sync between a device's log and an office server
-- (fieldapp/sync.py, DEVELOPERS.md "Sync protocol").
--
-- On every log:
--   reading_origin   which log (device) and which person took each reading;
--                    readings saved before this version have no row.
--   reading_review   a correction that arrived (by sync) for a reading another
--                    correction had replaced already: both versions are kept,
--                    this one without a supersedes link (the schema allows one
--                    correction per reading), and the pair is shown for review.
--   sync_settings    this log's identity (a uuid made on first use), the
--                    device name and person, and on a device the office's
--                    address, token and push cursor.
-- On a device:
--   sync_follows     the sites whose readings the device pulls, with the pull
--                    cursor of each.
--   sync_received    rows that came from the office, never pushed back.
-- On the office:
--   office_devices   devices paired for sync (a pairing code, a token per
--                    device, only the token's SHA-256 kept), revocable, with
--                    their last-seen time.
--   sync_lock        one row every push updates first: pushes apply one after
--                    another, so the office's row ids grow in commit order and
--                    a pull cursor never skips a row committed late.

CREATE TABLE reading_origin (
    reading_id   INTEGER PRIMARY KEY REFERENCES readings(id),
    log_uuid     TEXT NOT NULL,          -- the log the reading was taken on
    device_name  TEXT NOT NULL DEFAULT '',
    person       TEXT                    -- NULL: not known
);
CREATE INDEX reading_origin_person ON reading_origin (person, log_uuid);
CREATE INDEX reading_origin_log ON reading_origin (log_uuid);

CREATE TRIGGER reading_origin_no_update BEFORE UPDATE ON reading_origin
BEGIN SELECT RAISE(ABORT, 'reading origins are append-only'); END;
CREATE TRIGGER reading_origin_no_delete BEFORE DELETE ON reading_origin
BEGIN SELECT RAISE(ABORT, 'reading origins are append-only'); END;

CREATE TABLE reading_review (
    reading_id       INTEGER PRIMARY KEY REFERENCES readings(id),
    supersedes_uuid  TEXT NOT NULL,      -- the version this one was made to correct
    noted_at         TEXT NOT NULL
);
CREATE INDEX reading_review_target ON reading_review (supersedes_uuid);

CREATE TRIGGER reading_review_no_update BEFORE UPDATE ON reading_review
BEGIN SELECT RAISE(ABORT, 'review marks are append-only'); END;
CREATE TRIGGER reading_review_no_delete BEFORE DELETE ON reading_review
BEGIN SELECT RAISE(ABORT, 'review marks are append-only'); END;

CREATE TABLE sync_settings (
    key    TEXT PRIMARY KEY,
    value  TEXT NOT NULL
);

CREATE TABLE sync_follows (
    site_name  TEXT PRIMARY KEY,         -- as typed, compared without case
    cursor     TEXT NOT NULL DEFAULT '{}',
    added_at   TEXT NOT NULL
);

CREATE TABLE sync_received (
    kind    TEXT NOT NULL,               -- reading, void, ack, history
    row_id  INTEGER NOT NULL,
    PRIMARY KEY (kind, row_id)
);

CREATE TABLE office_devices (
    id            INTEGER PRIMARY KEY,
    token_sha256  TEXT NOT NULL UNIQUE,
    log_uuid      TEXT NOT NULL,
    name          TEXT NOT NULL DEFAULT '',
    person        TEXT NOT NULL DEFAULT '',
    address       TEXT NOT NULL DEFAULT '',
    code_id       INTEGER REFERENCES pairing_codes(id),
    paired_at     TEXT NOT NULL,
    last_seen_at  TEXT NOT NULL,
    last_sync_at  TEXT,
    readings_in   INTEGER NOT NULL DEFAULT 0,
    revoked_at    TEXT
);
CREATE INDEX office_devices_log ON office_devices (log_uuid);

CREATE TABLE sync_lock (
    id  INTEGER PRIMARY KEY,
    n   INTEGER NOT NULL
);
INSERT INTO sync_lock (id, n) VALUES (1, 0);
