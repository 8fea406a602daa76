-- grain: one row per data alert of the last audit (data_check tier), network-wide rows first
select
    a.period,
    a.item_id,
    a.kind,
    coalesce(d.site_label, a.site, case when a.device_key is null then '(whole network)' end,
             '(site not known)') as site_label,
    coalesce(d.room_label, a.device_key, '(all devices)') as room_label,
    a.device_key,
    a.last_study_date,
    a.expected_per_week,
    a.observed_per_week,
    a.detail
from data_alerts as a
left join dash_device as d on d.device_key = a.device_key
order by a.device_key is not null, site_label, room_label, a.kind
