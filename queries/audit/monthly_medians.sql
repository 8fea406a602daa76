-- grain: one row per device x exam type x quantity (x phantom) x calendar month, up to the period end
create or replace table monthly_medians as
select site, device_key, exam_type, quantity, unit, phantom, period as month,
       count(*) as n, quantile_cont(value, 0.5) as median,
       quantile_cont(value, 0.25) as p25, quantile_cont(value, 0.75) as p75
from audit_observation
where study_date < $date_to
  and patient_age_years >= $adult_min_age  -- unknown age is not adult
group by all
order by device_key, exam_type, quantity, month
