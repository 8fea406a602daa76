-- grain: one row per input file (source_object) of the audit period that was not loaded, and one
-- row per reason of the loaded ones (n_files, size_bytes summed). A file of the period: one whose
-- dose object has an irradiation event of a study dated in the period, or one with no readable
-- study date (quarantined, not a dose object, no event kept) recorded by an ingest run that also
-- recorded a file of the period. Read from the files' groups of dash_period_file_groups.sql (the
-- temporary dash_period_file_group: each file's studies and their dates from the kept
-- derived_object_study, the loaded files counted there), so this temporary table holds a few
-- thousand rows, not one per file (a million events: 364k). Read by the SELECTs that count the
-- files; dash_drop_materialised.sql drops both.
create temp table dash_period_file as
with
files as (
    select * from dash_period_file_group
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
