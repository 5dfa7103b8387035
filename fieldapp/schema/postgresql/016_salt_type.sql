-- Schema version 16 on PostgreSQL: the water type as a column of readings and
-- of the import staging table (see ../016_salt_type.sql for why). The same
-- plain ADD COLUMN; no row is changed.

ALTER TABLE readings ADD COLUMN salt_type TEXT;
ALTER TABLE import_staging ADD COLUMN salt_type TEXT;
