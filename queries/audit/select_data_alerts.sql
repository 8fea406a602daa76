-- grain: one row per data alert of the last audit (data_check tier), network-wide rows first
select period, device_key, site, kind, last_study_date, expected_per_week, observed_per_week, detail, item_id
from data_alerts
order by device_key nulls first, site, kind
