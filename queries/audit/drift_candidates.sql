-- grain: one row per series (device x site x exam type x quantity x unit) x month boundary with at least $min_n_side observations on each side
-- The inputs of the Mann-Whitney test of the values from that month on ("after") against those
-- before it: n_after, n_before, twice the rank sum of the after side, the series size and its
-- tie term sum(t^3 - t) over groups of t tied values (Hollander & Wolfe; as
-- scipy.stats.mannwhitneyu, which pipeline.metrics.drift_tests follows).
with
per_month as (
    select series_id, period, count(*) as n_month, sum(rank2) as rank2_month
    from drift_observation
    group by all
),
ties as (
    select series_id, sum(t * t * t - t) as tie_term
    from (select series_id, value, count(*) as t from drift_observation group by all)
    group by all
),
boundaries as (
    select *,
           sum(n_month) over w as n_after,
           sum(rank2_month) over w as rank2_after,
           sum(n_month) over (partition by series_id) as n_series,
           row_number() over (partition by series_id order by period) as month_index
    from per_month
    window w as (partition by series_id order by period desc
                 rows between unbounded preceding and current row)
)
select s.device_key, s.site, s.exam_type, s.quantity, s.unit, b.period as change_month,
       b.n_series - b.n_after as n_before, b.n_after, b.rank2_after, b.n_series, t.tie_term
from boundaries as b
join ties as t using (series_id)
join drift_series as s using (series_id)
where b.month_index > 1
  and b.n_series - b.n_after >= $min_n_side and b.n_after >= $min_n_side
order by s.device_key, s.site, s.exam_type, s.quantity, s.unit, b.period
