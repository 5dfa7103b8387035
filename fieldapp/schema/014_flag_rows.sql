-- Schema version 14: every flag of a reading as a row of its own, so that
-- questions about flags ("which current readings carry an error nobody has
-- acknowledged?") are a query over an index instead of a walk over each
-- reading's result JSON. The `flags` text column of readings (codes joined by
-- ';') stays as it was: the API and the CSV show it, and tools rely on it.
--
-- Rows are made by the database itself, in the same statement (so the same
-- transaction) as the reading they belong to: an AFTER INSERT trigger copies
-- the reading's flag list from its result JSON. Every way a reading arrives
-- (a save, an import in bulk, the import staging's INSERT ... SELECT, a
-- restore of an older log) goes through INSERT INTO readings, so none can
-- leave a reading without its rows. Append-only like the readings.

CREATE TABLE reading_flags (
    reading_id  INTEGER NOT NULL REFERENCES readings(id),
    seq         INTEGER NOT NULL,      -- position in the reading's flag list (0, 1, ...)
    code        TEXT NOT NULL,         -- the stable snake_case code (as in `flags`)
    severity    TEXT NOT NULL,         -- info, warning or error
    PRIMARY KEY (reading_id, seq)
);

-- The sites list's "to check" count reads the error-level rows only.
CREATE INDEX reading_flags_severity ON reading_flags (severity, reading_id, code);

CREATE TRIGGER reading_flags_no_update BEFORE UPDATE ON reading_flags
BEGIN SELECT RAISE(ABORT, 'reading flags are append-only'); END;

CREATE TRIGGER reading_flags_no_delete BEFORE DELETE ON reading_flags
BEGIN SELECT RAISE(ABORT, 'reading flags are append-only'); END;

CREATE TRIGGER readings_flag_rows AFTER INSERT ON readings
BEGIN
    INSERT INTO reading_flags (reading_id, seq, code, severity)
    SELECT NEW.id, f.key, json_extract(f.value, '$.code'), json_extract(f.value, '$.severity')
    FROM json_each(NEW.result_json, '$.flags') f;
END;

-- The readings already in the log.
INSERT INTO reading_flags (reading_id, seq, code, severity)
SELECT r.id, f.key, json_extract(f.value, '$.code'), json_extract(f.value, '$.severity')
FROM readings r, json_each(r.result_json, '$.flags') f;
