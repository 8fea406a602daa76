-- grain: one row per site: how its rooms' exam-type groups sit in the funnel (centred on the network typical value; only "above" is counted)
select
    site_label,
    count(distinct device_key) as n_rooms,
    count(*) as n_groups,
    sum(n) as n_exams,
    count(*) filter (where is_above_reference) as n_above_reference,
    count(*) filter (where funnel_zone = 'above 99.8 % limit') as n_above_998,
    count(*) filter (where funnel_zone = 'above 95 % limit') as n_above_95,
    count(*) filter (where not is_sample_adequate) as n_insufficient,
    quantile_cont(ratio_to_typical, 0.5) as median_ratio,
    max(ratio_to_typical) as max_ratio
from funnel_point
group by site_label
order by n_above_998 desc, n_above_reference desc, median_ratio desc, site_label
