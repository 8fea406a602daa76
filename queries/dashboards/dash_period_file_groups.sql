-- grain: one row per input file (source_object) not loaded, and one row per reason x ingest run
-- x in_period of the loaded ones (n_files, size_bytes summed): in_period tells whether any of the
-- file's studies lies in the audit period (NULL: no event kept for it). A temporary table read by
-- dash_period_files.sql (which keeps the files of the period) and then dropped
-- (dash_drop_materialised.sql). Each file's studies and their dates are read from the kept
-- derived_object_study (one row per SOP instance x study x device of the deduplicated events),
-- not by joining every event to its study (10M events: 16 -> 3-5 CPU-s; measured, no other
-- source). A statement of its own: within the one that keeps the files of the period, DuckDB
-- spilled the join of every file to its studies (10M events, 384 MB: 3.2 CPU-s and ~280 MB
-- written, against 1.6 and none alone; measured, no other source).
create temp table dash_period_file_group as
with
dated as (
    -- per file: does any of its studies lie in the period (NULL: no event kept for it)
    select sop_instance_uid,
           bool_or(study_date >= $date_from and study_date < $date_to) as in_period
    from derived_object_study
    group by sop_instance_uid
)
-- the loaded files counted here already, per reason, run and in_period (a file not loaded is a
-- group of its own: its path and content): 10M events held 3.6M rows of their hashes and runs
-- (~480 MiB) where a few groups do (measured, no other source)
select o.status, o.reason,
       case when o.status is distinct from 'loaded' then o.sha256 end as sha256,
       case when o.status is distinct from 'loaded' then o.path end as path,
       o.run_id, d.in_period, count(*) as n_files, sum(o.size_bytes)::bigint as size_bytes
from source_object as o
left join dated as d on d.sop_instance_uid = o.sop_instance_uid
group by all
