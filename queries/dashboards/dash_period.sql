-- grain: one row per audit period label found in the audit tables (one after a normal audit run)
select period, count(*) as n_rows
from (
    select period from audit_medians
    union all
    select period from network_reference
    union all
    select period from drift_flags
    union all
    select period from data_alerts   -- the label survives a period without any study
) as labels
where period is not null
group by period
order by period
