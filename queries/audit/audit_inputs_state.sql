-- grain: one row: what an audit reads from the warehouse, summarised to tell whether an earlier audit is still current
-- Rows are only ever added to the raw tables (a reload of the same file adds nothing), so their
-- counts and the latest load run change whenever the data does; the site map and the reference
-- levels are small and hashed whole. The exam, indication and alert rules and the settings come
-- from the configuration and are summarised by pipeline.audit.
select
    (select count(*) from raw_source_object) as n_source_object,
    (select max(run_id) from raw_source_object) as last_source_run,
    (select count(*) from raw_dose_object) as n_dose_object,
    (select count(*) from raw_study) as n_study,
    (select count(*) from raw_device) as n_device,
    (select count(*) from raw_ct_event) as n_ct_event,
    (select count(*) from raw_projection_event) as n_projection_event,
    (select count(*) from raw_accumulated) as n_accumulated,
    (select count(*) from raw_value_issue) as n_value_issue,
    (select count(*) from raw_run) as n_run,
    (select max(run_id) from raw_run) as last_run,
    (select count(*) from raw_site_map) as n_site_map,
    (select sum(hash(m)) from raw_site_map as m)::varchar as site_map_hash,
    (select count(*) from reference_level) as n_reference_level,
    (select sum(hash(r)) from reference_level as r)::varchar as reference_level_hash
