-- grain: one row: a digest of the raw tables the derived_* tables are computed from (row counts
-- and hashes of their keys), to tell whether those tables still match them
select concat_ws('|',
    (select count(*) || ':' || coalesce(sum(hash(sop_instance_uid, study_key, run_id)), 0)
       from raw_dose_object),
    (select count(*) || ':' || coalesce(sum(hash(study_key, procedure_code)), 0) from raw_study),
    (select count(*) || ':' || coalesce(sum(hash(sop_instance_uid)), 0) from raw_ct_event),
    (select count(*) || ':' || coalesce(sum(hash(sop_instance_uid)), 0) from raw_projection_event),
    (select count(*) || ':' || coalesce(sum(hash(sop_instance_uid)), 0) from raw_accumulated)
) as raw_state
