-- grain: one row per alert rule x site: number of alerts and of distinct studies, with the
-- rule's family, quantity, unit and fixed threshold (NULL when computed per room) for its
-- plain words
select
    a.rule,
    any_value(a.family) as family,
    -- a rule that checks several quantities (the robust outliers: each audited quantity) has
    -- none of its own: NULL, not whichever row came first
    case when count(distinct a.quantity) = 1 then min(a.quantity) end as quantity,
    case when count(distinct a.quantity) = 1 then min(a.unit) end as unit,
    case when count(distinct a.threshold) = 1 then max(a.threshold) end as threshold,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    count(*) as n_alerts,
    count(distinct a.study_key) as n_studies
from dose_alerts as a
left join dash_device as d on d.device_key = a.device_key
group by a.rule, coalesce(d.site_label, a.site, '(site not known)')
order by a.rule, site_label
