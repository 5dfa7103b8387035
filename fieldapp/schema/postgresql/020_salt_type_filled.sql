-- Schema version 20 on PostgreSQL: the twin of ../020_salt_type_filled.sql
-- (the water type of readings stored before schema 016 copied from their
-- result JSON into the salt_type column). Inside this migration's one
-- transaction (under the writers' lock) the append-only trigger is disabled,
-- the column filled where it is NULL and the result JSON says sea salt, and
-- the trigger enabled again; a failure rolls back all of it.

ALTER TABLE readings DISABLE TRIGGER readings_no_update;

UPDATE readings SET salt_type = 'sea_salt'
 WHERE salt_type IS NULL AND strpos(result_json, '"salt_type":"sea_salt"') > 0;

ALTER TABLE readings ENABLE TRIGGER readings_no_update;
