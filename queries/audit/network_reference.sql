-- grain: one row per exam type x quantity x population (x phantom) across the network in the period
-- ICRP Publication 135: typical value = median of the room medians; the network's own
-- reference level = 75th percentile of the room medians. Only rooms with an adequate sample
-- count (n_rooms); n_rooms_all counts every room with data.
create or replace table network_reference as
select
    $period as period, exam_type, quantity, unit, population, phantom,
    count(*) filter (where is_sample_adequate) as n_rooms,
    count(*) as n_rooms_all,
    count(distinct site) filter (where is_sample_adequate) as n_sites,
    sum(n) as n_exams,
    quantile_cont(median, 0.5) filter (where is_sample_adequate) as typical_value,
    quantile_cont(median, 0.75) filter (where is_sample_adequate) as p75_of_room_medians,
    any_value(reference_set) as reference_set,
    any_value(reference_value) as reference_value
from audit_medians
group by period, exam_type, quantity, unit, population, phantom
order by exam_type, quantity
