-- grain: one row per alert rule x site: number of alerts and of distinct studies
select
    a.rule,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    count(*) as n_alerts,
    count(distinct a.study_key) as n_studies
from dose_alerts as a
left join dash_device as d on d.device_key = a.device_key
group by all
order by a.rule, site_label
