-- grain: one row per study x outlier rule that fired in the period: the robust-outlier rows of
-- dose_alerts (dose_alerts.sql writes the other rules' rows first), inserted over parts of the
-- rooms ($part of $parts, by a hash of device_key; pipeline.audit._by_parts): the medians and
-- the median absolute deviations hold every value of a group in memory.
insert into dose_alerts
with
rules as (
    select * from alert_rule_in_force
),
obs as not materialized (
    -- read twice (the groups' values, then the test), not held: a held copy of every observation
    -- of the part cost more than the scans (3.55 against 2.90 CPU-s for one of four parts at 10M
    -- events, DuckDB 2.0; measured, no other source)
    select o.*, ln(o.value) as log_value
    from audit_observation as o
    where o.study_date >= $date_from and o.study_date < $date_to and o.value > 0
      and hash(o.device_key) % $parts = $part
),
sorted as (
    -- each group's log values once, sorted: the median and the median absolute deviation both
    -- come from this list (two median() aggregates and a join of every observation to its
    -- group's median between them took 2.12-3.33 CPU-s for one of four parts at 10M events,
    -- the list 1.88-2.70, the same rows; DuckDB 2.0, measured, no other source)
    select exam_type, device_key, quantity, count(*) as n, list_sort(list(log_value)) as v
    from obs group by all
    having count(*) >= $outlier_min_n
),
centre as (
    -- the median as DuckDB's median() gives it: the middle value, or the mean of the two middle
    -- values as (a + b) / 2 (not a + (b - a) / 2, which differs in the last bit)
    select exam_type, device_key, quantity, n, v,
           case when n % 2 = 1 then v[(n + 1) // 2] else (v[n // 2] + v[n // 2 + 1]) / 2 end as med
    from sorted
),
deviation as (
    select exam_type, device_key, quantity, n, med,
           list_sort(list_transform(v, lambda x: abs(x - med))) as d
    from centre
),
spread as (
    select exam_type, device_key, quantity, n, med,
           case when n % 2 = 1 then d[(n + 1) // 2] else (d[n // 2] + d[n // 2 + 1]) / 2 end as mad
    from deviation
),
spread_rule as (
    -- each group's spread with each outlier rule, before meeting the observations: they then
    -- join on the group's keys alone (a join on the rule family with the |M| test beside it ran
    -- as a nested loop over every observation)
    select s.*, r.family, r.action, r.verified, r.threshold as z_threshold, r.source
    from spread as s
    join rules as r on r.family = 'robust_outlier'
    where s.mad > 0
),
outliers as (
    -- modified z-score on log dose within exam type x device (Iglewicz & Hoaglin 1993):
    -- M = 0.6745 (x - median) / MAD; |M| > threshold is an outlier; high and low apart
    select o.study_key, o.patient_key, o.device_key, o.site, o.exam_type, o.study_date,
           case when o.log_value > s.med then 'robust_outlier_high' else 'robust_outlier_low' end as rule,
           s.family, s.action, s.verified as threshold_verified,
           o.quantity, o.value,
           exp(s.med + sign(o.log_value - s.med) * s.z_threshold * s.mad / 0.6745) as threshold,
           o.unit, s.source,
           'modified z-score of log ' || o.quantity || ' within exam type x device (n = ' || s.n || ')'
               as method
    from obs as o
    join spread_rule as s using (exam_type, device_key, quantity)
    where abs(0.6745 * (o.log_value - s.med) / s.mad) > s.z_threshold
)
select study_key, patient_key, device_key, site, exam_type, study_date, rule, family, action,
       quantity, value, threshold, unit, source, method, threshold_verified
from outliers
order by study_date, rule, study_key
