-- grain: one row per quantity x cell of the funnel plane holding audit groups of funnel_point
-- not drawn one by one (not in funnel_drawn, the frame of dash_funnel_drawn.sql): how many
-- groups, and how many of them have fewer exams than the audit minimum. Cells are 0.1 wide in
-- log10 of the number of exams and 0.02 wide in log10 of the ratio to the network typical
-- value (common practice, no source: fine enough that a cell reads as a point at page scale);
-- n_mid and ratio_mid are the cell's geometric centre, where its mark is drawn.
with
rest as (
    select p.quantity, p.unit, p.n, p.ratio_to_typical, p.is_sample_adequate
    from funnel_point as p
    anti join funnel_drawn as d
      on d.device_key = p.device_key and d.exam_type = p.exam_type and d.quantity = p.quantity
     and d.population = p.population and d.stratum is not distinct from p.stratum
     and d.phantom is not distinct from p.phantom
),
cells as (
    select
        quantity,
        any_value(unit) as unit,
        floor(log10(n) / 0.1)::integer as n_cell,
        floor(log10(ratio_to_typical) / 0.02)::integer as ratio_cell,
        count(*) as n_groups,
        count(*) filter (where not is_sample_adequate) as n_insufficient,
        min(n) as n_min,
        max(n) as n_max,
        min(ratio_to_typical) as ratio_min,
        max(ratio_to_typical) as ratio_max
    from rest
    where n > 0 and ratio_to_typical > 0
    group by quantity, n_cell, ratio_cell
)
select
    quantity, unit, n_groups, n_insufficient, n_min, n_max, ratio_min, ratio_max,
    pow(10, (n_cell + 0.5) * 0.1) as n_mid,
    pow(10, (ratio_cell + 0.5) * 0.02) as ratio_mid
from cells
order by quantity, n_cell, ratio_cell
