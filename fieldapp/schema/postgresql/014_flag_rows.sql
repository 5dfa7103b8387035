-- Schema version 14 on PostgreSQL: the twin of ../014_flag_rows.sql (every
-- flag of a reading as a row, made by the database in the same statement as
-- the reading). Here the trigger runs once per INSERT statement over its new
-- rows (a transition table), so an import's INSERT ... SELECT of thousands of
-- readings fills their flag rows in one more statement, not one per reading.

CREATE TABLE reading_flags (
    reading_id  bigint NOT NULL REFERENCES readings(id),
    seq         integer NOT NULL,
    code        text NOT NULL,
    severity    text NOT NULL,
    PRIMARY KEY (reading_id, seq)
);

CREATE INDEX reading_flags_severity ON reading_flags (severity, reading_id, code);

CREATE TRIGGER reading_flags_no_update BEFORE UPDATE ON reading_flags FOR EACH ROW
EXECUTE FUNCTION fieldapp_append_only('reading flags are append-only');
CREATE TRIGGER reading_flags_no_delete BEFORE DELETE ON reading_flags FOR EACH ROW
EXECUTE FUNCTION fieldapp_append_only('reading flags are append-only');
CREATE TRIGGER reading_flags_no_truncate BEFORE TRUNCATE ON reading_flags FOR EACH STATEMENT
EXECUTE FUNCTION fieldapp_append_only('reading flags are append-only');

-- The flag list of a result JSON (its "flags" array; none when absent).
CREATE FUNCTION fieldapp_flag_list(result_json text) RETURNS jsonb
LANGUAGE sql IMMUTABLE AS $$
    SELECT CASE WHEN jsonb_typeof(result_json::jsonb -> 'flags') = 'array'
                THEN result_json::jsonb -> 'flags' ELSE '[]'::jsonb END
$$;

CREATE FUNCTION readings_flag_rows() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    INSERT INTO reading_flags (reading_id, seq, code, severity)
    SELECT n.id, f.ord - 1, f.value ->> 'code', f.value ->> 'severity'
    FROM new_rows n,
         jsonb_array_elements(fieldapp_flag_list(n.result_json)) WITH ORDINALITY AS f(value, ord);
    RETURN NULL;
END
$$;

CREATE TRIGGER readings_flag_rows AFTER INSERT ON readings
REFERENCING NEW TABLE AS new_rows FOR EACH STATEMENT EXECUTE FUNCTION readings_flag_rows();

-- The readings already in the log.
INSERT INTO reading_flags (reading_id, seq, code, severity)
SELECT r.id, f.ord - 1, f.value ->> 'code', f.value ->> 'severity'
FROM readings r,
     jsonb_array_elements(fieldapp_flag_list(r.result_json)) WITH ORDINALITY AS f(value, ord);
