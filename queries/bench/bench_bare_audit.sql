-- grain: one statement per part of the audit, each in its barest form (bench/audit_bare.py)
-- Each part is the aggregate an audit table must compute, over the audited values of the period
-- (derived_audit_observation, no join, no reference level, no label): what is left when
-- everything but the arithmetic the output needs is taken away. The parts are separated by a
-- line `-- part: <name>`; each creates a temporary table, so that DuckDB computes every column.
-- The first, `setup`, is run once before the others and not timed: a table macro (inlined where
-- it is read) of the period's values with the population of their room group.
-- part: setup
create or replace temp macro bare_period_value(date_from, date_to) as table
select device_key, exam_type, quantity, phantom, value, patient_key, patient_weight_kg,
       case when patient_age_years is null then 'unknown_age'
            when patient_age_years >= 18 then 'adult' else 'paediatric' end as population
from derived_audit_observation
where study_date >= date_from and study_date < date_to;
-- part: room_quartiles
-- audit_medians: n, median and quartiles per room group (device x exam type x quantity x population x phantom)
create or replace temp table bare_part as
select device_key, exam_type, quantity, phantom, population,
       count(*) as n, quantile_cont(value, [0.5, 0.25, 0.75]) as q
from bare_period_value($date_from, $date_to)
group by all;
-- part: room_order_statistics
-- audit_medians: the sorted values per room group, from which the median's confidence interval is read
create or replace temp table bare_part as
select device_key, exam_type, quantity, phantom, population,
       list_sort(list(value)) as sorted_values
from bare_period_value($date_from, $date_to)
group by all;
-- part: room_standard_size_median
-- audit_medians: the median over standard-size patients (50-90 kg) per room group
create or replace temp table bare_part as
select device_key, exam_type, quantity, phantom, population,
       quantile_cont(value, 0.5) filter (where patient_weight_kg between 50 and 90) as m
from bare_period_value($date_from, $date_to)
group by all;
-- part: room_patients
-- audit_medians: distinct patients per room group
create or replace temp table bare_part as
select device_key, exam_type, quantity, phantom, population,
       count(distinct patient_key) as n_patients
from bare_period_value($date_from, $date_to)
group by all;
-- part: room_distribution
-- audit_distribution: five order statistics per room group
create or replace temp table bare_part as
select device_key, exam_type, quantity, phantom, population,
       quantile_cont(value, [0.05, 0.25, 0.5, 0.75, 0.95]) as q
from bare_period_value($date_from, $date_to)
group by all;
-- part: monthly_medians
-- monthly_medians: adult median and quartiles per room x exam type x quantity x month, up to the period end
create or replace temp table bare_part as
select device_key, exam_type, quantity, phantom, period,
       quantile_cont(value, [0.5, 0.25, 0.75]) as q
from derived_audit_observation
where study_date < $date_to and patient_age_years >= 18
group by all;
-- part: outlier_spread
-- dose_alerts (robust outliers): median and median absolute deviation of log values per exam type x device x quantity
create or replace temp table bare_part as
select exam_type, device_key, quantity, med,
       list_sort(list_transform(v, lambda x: abs(x - med)))[(len(v) + 1) // 2] as mad
from (select exam_type, device_key, quantity, v, v[(len(v) + 1) // 2] as med
      from (select exam_type, device_key, quantity, list_sort(list(ln(value))) as v
            from bare_period_value($date_from, $date_to)
            where value > 0
            group by all));
-- part: drift_ranks
-- drift_flags: the rank of every adult value within its series (device x exam type x quantity), up to the period end
create or replace temp table bare_part as
-- (series keyed by a 64-bit hash of its three texts: for timing only, as the audit's integer
-- series id is; partitioned by the texts it took 3.1 CPU-s at 10M events against 2.3 for the
-- audit's own statement, measured, no other source)
select device_key, exam_type, quantity, period,
       rank() over (partition by hash(device_key, exam_type, quantity) order by value) as r
from derived_audit_observation
where study_date < $date_to and patient_age_years >= 18
