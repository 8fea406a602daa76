-- grain: one row per input file (source_object) of the audit period: a file whose dose object
-- has a study dated in the period, or a file with no readable study date (quarantined, not a
-- dose object) recorded by an ingest run that also recorded a file of the period. Kept as a
-- temporary table for the SELECTs that count them (a million events: 364k files, read once here
-- instead of through a pandas frame); dash_drop_materialised.sql drops it.
create temp table dash_period_file as
with
dated as (
    -- per file: does any of its events belong to a study of the period (one grouping)
    select e.sop_instance_uid,
           bool_or(s.study_date >= $date_from and s.study_date < $date_to) as in_period
    from irradiation_event as e
    join study_dose as s on s.study_key = e.study_key and s.device_key = e.device_key
    group by e.sop_instance_uid
),
files as (
    select o.*, d.in_period,
           bool_or(coalesce(d.in_period, false)) over (partition by o.run_id) as run_has_period
    from source_object as o
    left join dated as d on d.sop_instance_uid = o.sop_instance_uid
)
select status, reason, sha256, size_bytes, run_id, in_period is null as is_undated
from files
where in_period or (in_period is null and run_has_period)
