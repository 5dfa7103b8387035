-- Schema version 15 on PostgreSQL: the twin of ../015_view_columns.sql (the
-- values the site views read, as columns of readings, copied from
-- result_json). Filling them for the readings already in the log is an
-- UPDATE, which the append-only trigger refuses: inside this migration's one
-- transaction (under the writers' lock) the trigger is disabled, the columns
-- filled, and the trigger enabled again; a failure rolls back all of it.

ALTER TABLE readings ADD COLUMN ece_uncertainty_pct double precision;
ALTER TABLE readings ADD COLUMN ec_fc_dS_m double precision;
ALTER TABLE readings ADD COLUMN psi_s_fc_MPa double precision;
ALTER TABLE readings ADD COLUMN ec_sw_dS_m double precision;
ALTER TABLE readings ADD COLUMN psi_s_sw_MPa double precision;
ALTER TABLE readings ADD COLUMN psi_total_MPa double precision;
ALTER TABLE readings ADD COLUMN margin_to_pwp_MPa double precision;

ALTER TABLE readings DISABLE TRIGGER readings_no_update;

UPDATE readings SET
    ece_uncertainty_pct = (result_json::jsonb #>> '{ece_uncertainty_pct}')::double precision,
    ec_fc_dS_m = (result_json::jsonb #>> '{soil_solution,ec_fc_dS_m}')::double precision,
    psi_s_fc_MPa = (result_json::jsonb #>> '{soil_solution,psi_s_fc_MPa}')::double precision,
    ec_sw_dS_m = (result_json::jsonb #>> '{soil_solution,ec_sw_dS_m}')::double precision,
    psi_s_sw_MPa = (result_json::jsonb #>> '{soil_solution,psi_s_sw_MPa}')::double precision,
    psi_total_MPa = (result_json::jsonb #>> '{soil_solution,psi_total_MPa}')::double precision,
    margin_to_pwp_MPa = (result_json::jsonb #>> '{soil_solution,margin_to_pwp_MPa}')::double precision;

ALTER TABLE readings ENABLE TRIGGER readings_no_update;
