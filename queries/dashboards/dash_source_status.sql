-- grain: one row per file status x reason over the files of the audit period (dash_period_file,
-- made by dash_period_files.sql: a row per file not loaded, a row per reason of the loaded ones)
with
counted as (
    select status, coalesce(reason, '') as reason, sum(n_files)::bigint as n_files,
           sum(size_bytes) as size_bytes
    from dash_period_file
    group by status, coalesce(reason, '')
)
select status, reason, n_files, size_bytes
from counted
order by case status when 'loaded' then 1 when 'duplicate' then 2 when 'not_dose' then 3
                     else 4 end, n_files desc, reason
