-- Schema version 20: the water type of the readings stored before schema 016
-- copied into their salt_type column, so that the column alone says which
-- readings are sea-salt-like and no reader has to search each reading's
-- result JSON for it (the CSV export did, for every reading of mixed salts:
-- a third of its query time on a large log).
--
-- Before 016 the water type was kept only inside result_json, written
-- compact by fieldapp.records.build_record, where a sea-salt reading holds
-- the text "salt_type":"sea_salt". Since 016 every reading is stored with its
-- column, so after this version a NULL there means mixed salts or not said.
--
-- Filling the column is an UPDATE, which the append-only trigger refuses:
-- as in schema 015, inside this migration's one transaction the no-update
-- trigger is dropped, the column filled for the readings whose result JSON
-- says sea salt and whose column is empty, and the trigger created again
-- exactly as schema 001 made it. A failure rolls back all of it. Only rows
-- whose column is NULL are touched, and they get the value their own result
-- JSON already holds: nothing a person entered or a conversion computed changes.

DROP TRIGGER readings_no_update;

UPDATE readings SET salt_type = 'sea_salt'
 WHERE salt_type IS NULL AND instr(result_json, '"salt_type":"sea_salt"') > 0;

CREATE TRIGGER readings_no_update BEFORE UPDATE ON readings
BEGIN SELECT RAISE(ABORT, 'readings are append-only: record a correction instead'); END;
