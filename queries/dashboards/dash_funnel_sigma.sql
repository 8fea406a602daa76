-- grain: one row per quantity with audited groups: pooled spread of log dose
-- Within one room, sigma = ln(p75 / p25) / 1.349 (the interquartile range of a normal
-- distribution is 1.349 sigma; doses taken as log-normal), pooled over rooms with at least
-- 5 exams with weights n - 1. n_max: the largest group, to size the funnel.
select
    quantity,
    any_value(unit) as unit,
    -- the weighted squares summed in sorted order: a parallel sum() adds them in whichever order
    -- its threads meet them, and the last digit of sigma (and of every z and limit drawn from it)
    -- changed from run to run at 10M events
    sqrt(list_sum(list_sort(list((n - 1) * pow(ln(p75 / p25) / 1.349, 2))
                                filter (where n >= 5 and p25 > 0)))
         / nullif(sum(n - 1) filter (where n >= 5 and p25 > 0), 0)) as sigma_log,
    count(*) filter (where n >= 5 and p25 > 0) as n_groups_pooled,
    max(n) as n_max
from audit_medians
where median > 0
group by quantity
order by quantity
