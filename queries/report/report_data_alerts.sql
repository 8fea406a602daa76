-- grain: one row per data check of the last audit (data_alerts): the data_check tier that leads
-- the committee report, since a feed that went quiet makes every dose finding incomplete
select a.kind, a.period, a.site, a.device_key, coalesce(d.station_name, 'whole warehouse') as room,
       a.last_study_date, a.expected_per_week, a.observed_per_week, a.detail, a.item_id
from data_alerts as a
left join device as d using (device_key)
order by case a.kind when 'no_data' then 0 when 'silent' then 1 else 2 end, a.site, room
