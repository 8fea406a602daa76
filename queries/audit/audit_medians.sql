-- grain: one row per site x device x exam type x quantity x population (x CTDIvol phantom) in the period
-- Percentiles: quantile_cont = linear interpolation between order statistics (Hyndman & Fan
-- 1996 definition 7). median_ci_*: distribution-free 95 % interval from order statistics,
-- ranks from the exact binomial(n, 1/2) (Conover 1999, sec. 3.2), table median_ci_rank.
create or replace table audit_medians as
with
obs as (
    select *,
           case when patient_age_years is null or patient_age_years >= $adult_min_age
                then 'adult' else 'paediatric' end as population,
           patient_weight_kg between $weight_min and $weight_max as is_standard_size
    from audit_observation
    where study_date >= $date_from and study_date < $date_to
),
groups as (
    select site, device_key, exam_type, quantity, unit, population, phantom,
           count(*) as n,
           quantile_cont(value, 0.5) as median,
           quantile_cont(value, 0.25) as p25,
           quantile_cont(value, 0.75) as p75,
           list_sort(list(value)) as sorted_values,
           count(*) filter (where is_standard_size) as n_standard_size,
           quantile_cont(value, 0.5) filter (where is_standard_size) as median_standard_size,
           count(patient_weight_kg) as n_with_weight,
           count(distinct patient_key) as n_patients
    from obs
    group by all
),
with_ci as (
    select g.*, g.sorted_values[r.lower_rank] as median_ci_low,
           g.sorted_values[r.upper_rank] as median_ci_high
    from groups as g
    left join median_ci_rank as r on r.n = g.n
)
select
    $period as period,
    c.site, c.device_key, c.exam_type, c.quantity, c.unit, c.population, c.phantom,
    c.n, c.median, c.p25, c.p75, c.median_ci_low, c.median_ci_high,
    c.n_standard_size, c.median_standard_size, c.n_with_weight, c.n_patients,
    r.set_id as reference_set,
    r.value_canonical as reference_value,
    c.median / r.value_canonical as ratio_to_reference,
    c.median_standard_size / r.value_canonical as ratio_standard_size_to_reference,
    coalesce(c.median > r.value_canonical, false) as is_above_reference,
    coalesce(c.median < $low_fraction * r.value_canonical, false) as is_well_below_reference,
    c.n >= $min_n as is_sample_adequate,
    r.citation_title as reference_citation
from with_ci as c
left join reference_in_force as r
  on r.exam_type = c.exam_type and r.quantity = c.quantity and r.population = c.population
 and (r.phantom is null or r.phantom = c.phantom)
order by c.exam_type, c.quantity, c.site, c.device_key
