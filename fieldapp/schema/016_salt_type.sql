-- Schema version 16: the water type the person said a reading's water is
-- (empty: mixed salts or not said, the NaCl and Handbook 60 routes;
-- 'sea_salt': like diluted seawater, the PSS-78 seawater route is reported
-- beside the NaCl route) as a column of readings, like the other inputs, so
-- that the CSV export carries it and an import into another log converts the
-- reading the same way. Until this version it was kept only inside
-- result_json.
--
-- Plain ADD COLUMN, portable to PostgreSQL; no row is changed. A reading
-- stored before this version has NULL here and its water type still in its
-- result_json, where the readers look when the column is empty
-- (fieldapp.store: stored_salt_type). The import staging table gets the
-- same column, since staged rows are copied into readings column by column.

ALTER TABLE readings ADD COLUMN salt_type TEXT;
ALTER TABLE import_staging ADD COLUMN salt_type TEXT;
