-- Schema version 15: the values the site views read (site page, visit report,
-- summary API) as real columns of readings, so that interpreting a site is a
-- query over columns instead of decoding every reading's result JSON. They
-- are copies of numbers inside result_json (which stays the whole record):
-- the stated ECe uncertainty and the soil solution estimates. New readings
-- get them from the same result JSON in the same INSERT (fieldapp.store).
--
-- ALTER TABLE ADD COLUMN changes no row, but filling the new columns of the
-- readings already in the log is an UPDATE, which the append-only trigger
-- refuses. So, inside this migration's one transaction (BEGIN IMMEDIATE ...
-- COMMIT in store.migrate: no other connection can write meanwhile), the
-- no-update trigger is dropped, the columns are filled from result_json, and
-- the trigger is created again exactly as schema 001 made it. If any step
-- fails the whole migration rolls back, trigger included. No value a person
-- entered or a conversion computed is changed.

ALTER TABLE readings ADD COLUMN ece_uncertainty_pct REAL;   -- ± % stated for the ECe method
ALTER TABLE readings ADD COLUMN ec_fc_dS_m REAL;            -- soil solution EC at field capacity
ALTER TABLE readings ADD COLUMN psi_s_fc_MPa REAL;          -- its solute potential
ALTER TABLE readings ADD COLUMN ec_sw_dS_m REAL;            -- soil solution EC at the water content
ALTER TABLE readings ADD COLUMN psi_s_sw_MPa REAL;          -- its solute potential
ALTER TABLE readings ADD COLUMN psi_total_MPa REAL;         -- matric + solute
ALTER TABLE readings ADD COLUMN margin_to_pwp_MPa REAL;     -- distance to the wilting point

DROP TRIGGER readings_no_update;

UPDATE readings SET
    ece_uncertainty_pct = json_extract(result_json, '$.ece_uncertainty_pct'),
    ec_fc_dS_m = json_extract(result_json, '$.soil_solution.ec_fc_dS_m'),
    psi_s_fc_MPa = json_extract(result_json, '$.soil_solution.psi_s_fc_MPa'),
    ec_sw_dS_m = json_extract(result_json, '$.soil_solution.ec_sw_dS_m'),
    psi_s_sw_MPa = json_extract(result_json, '$.soil_solution.psi_s_sw_MPa'),
    psi_total_MPa = json_extract(result_json, '$.soil_solution.psi_total_MPa'),
    margin_to_pwp_MPa = json_extract(result_json, '$.soil_solution.margin_to_pwp_MPa');

CREATE TRIGGER readings_no_update BEFORE UPDATE ON readings
BEGIN SELECT RAISE(ABORT, 'readings are append-only: record a correction instead'); END;

