-- Schema version 10: wrong pairing codes are remembered in the log, so a
-- restart does not clear the limiter, and a code pairs a bounded number of
-- devices. Failures are settings-like rows, pruned once they are older than
-- the limiter's window; they hold only the address and the time.

CREATE TABLE pairing_failures (
    id         INTEGER PRIMARY KEY,
    address    TEXT NOT NULL,
    failed_at  REAL NOT NULL              -- seconds since 1970, UTC
);
CREATE INDEX pairing_failures_by_time ON pairing_failures (failed_at);
CREATE INDEX pairing_failures_by_address ON pairing_failures (address, failed_at);

ALTER TABLE pairing_codes ADD COLUMN max_devices INTEGER NOT NULL DEFAULT 10;
