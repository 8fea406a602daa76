-- grain: one row per file status x reason over every ingest run in the warehouse (source_object)
with
counted as (
    select status, coalesce(reason, '') as reason, count(*) as n_files,
           sum(size_bytes) as size_bytes
    from source_object
    group by status, coalesce(reason, '')
)
select status, reason, n_files, size_bytes
from counted
order by case status when 'loaded' then 1 when 'duplicate' then 2 when 'not_dose' then 3
                     else 4 end, n_files desc, reason
