-- Schema version 4: pairing of tablets when the log is shared on a network
-- (serve --lan). A pairing code lets a tablet pair once; the tablet then
-- holds a session token in a cookie. Only the token's SHA-256 is stored, so
-- a copy of this file cannot be used to pass as a paired tablet.
-- Codes and devices are revoked, never deleted: the list shows who had access.

CREATE TABLE pairing_codes (
    id          INTEGER PRIMARY KEY,
    code        TEXT NOT NULL UNIQUE,      -- upper case, no separators
    created_at  TEXT NOT NULL,             -- UTC, ISO 8601
    expires_at  TEXT NOT NULL,
    revoked_at  TEXT
);

CREATE TABLE paired_devices (
    id            INTEGER PRIMARY KEY,
    token_sha256  TEXT NOT NULL UNIQUE,
    label         TEXT NOT NULL DEFAULT '',
    user_agent    TEXT NOT NULL DEFAULT '',
    address       TEXT NOT NULL DEFAULT '',
    code_id       INTEGER REFERENCES pairing_codes(id),
    paired_at     TEXT NOT NULL,
    last_seen_at  TEXT NOT NULL,
    revoked_at    TEXT
);
