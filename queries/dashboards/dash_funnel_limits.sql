-- grain: one row per quantity x sample size on a log-spaced grid from 1 to 1.25 n_max:
-- the funnel's upper control limits above ratio 1, the network typical value (same model as
-- dash_funnel_points.sql)
with
grid as (
    select distinct
        s.quantity,
        s.sigma_log,
        greatest(1, round(exp(ln(greatest(s.n_max, 8) * 1.25) * g.i / 60.0)))::integer as n
    from funnel_sigma as s
    cross join range(0, 61) as g(i)
    where s.sigma_log is not null and s.sigma_log > 0
)
select
    quantity,
    n,
    exp(1.959964 * 1.2533 * sigma_log / sqrt(n)) as upper_95,
    exp(3.090232 * 1.2533 * sigma_log / sqrt(n)) as upper_998
from grid
order by quantity, n
