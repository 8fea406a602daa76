-- grain: one row per audit group of funnel_point (the frame of dash_funnel_points.sql) drawn as
-- its own point in the funnel plot of its quantity: every group when the quantity has at most
-- $max_points groups; else only groups above a control limit, at most $max_points of them, the
-- highest z first (dash_funnel_cells.sql counts the groups not drawn one by one). Same columns
-- and order as dash_funnel_points.sql (ties broken by population, stratum, phantom).
with
ranked as (
    select
        p.*,
        count(*) over (partition by p.quantity) as n_points,
        row_number() over (partition by p.quantity
                           order by p.z desc nulls last, p.ratio_to_typical desc, p.site_label,
                                    p.room_label, p.exam_label, p.population, p.stratum,
                                    p.phantom) as z_rank
    from funnel_point as p
)
select * exclude (n_points, z_rank)
from ranked
where n_points <= $max_points
   or (z_rank <= $max_points and funnel_zone in ('above 99.8 % limit', 'above 95 % limit'))
order by ratio_to_typical desc, site_label, room_label, exam_label, quantity, population,
         stratum, phantom
