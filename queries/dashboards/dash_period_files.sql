-- grain: one row per input file (source_object) of the audit period that was not loaded, and one
-- row per reason of the loaded ones (n_files, size_bytes summed). A file of the period: one whose
-- dose object has an irradiation event of a study dated in the period, or one with no readable
-- study date (quarantined, not a dose object, no event kept) recorded by an ingest run that also
-- recorded a file of the period. Each file's studies and their dates are read from the kept
-- derived_object_study (one row per SOP instance x study x device of the deduplicated events),
-- not by joining every event to its study (10M events: 16 -> 3-5 CPU-s; measured, no other
-- source); the loaded files are counted here, so the temporary table holds a few thousand rows,
-- not one per file (a million events: 364k). Read by the SELECTs that count the files;
-- dash_drop_materialised.sql drops it.
create temp table dash_period_file as
with
dated as (
    -- per file: does any of its studies lie in the period (NULL: no event kept for it)
    select sop_instance_uid,
           bool_or(study_date >= $date_from and study_date < $date_to) as in_period
    from derived_object_study
    group by sop_instance_uid
),
files as materialized (
    -- the loaded files counted here already, per reason, run and in_period (a file not loaded
    -- is a group of its own: its path and content): 10M events held 3.6M rows of their
    -- hashes and runs (~480 MiB) where a few groups do (measured, no other source)
    select o.status, o.reason,
           case when o.status is distinct from 'loaded' then o.sha256 end as sha256,
           case when o.status is distinct from 'loaded' then o.path end as path,
           o.run_id, d.in_period, count(*) as n_files, sum(o.size_bytes)::bigint as size_bytes
    from source_object as o
    left join dated as d on d.sop_instance_uid = o.sop_instance_uid
    group by all
),
runs as (
    -- per ingest run (a NULL run_id is one run, as a window's partition would take it)
    select run_id, bool_or(coalesce(in_period, false)) as run_has_period
    from files
    group by run_id
),
period as (
    select f.*
    from files as f
    join runs as r on r.run_id is not distinct from f.run_id
    where f.in_period or (f.in_period is null and r.run_has_period)
)
select status, reason, sha256, run_id, 1::bigint as n_files, size_bytes
from period
where status is distinct from 'loaded'
union all
select status, reason, null, null, sum(n_files)::bigint, sum(size_bytes)::bigint
from period
where status = 'loaded'
group by status, reason
