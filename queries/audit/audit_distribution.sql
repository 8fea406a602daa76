-- grain: one row per device x exam type x quantity x population (x CTDIvol phantom) in the period:
-- order statistics of the audited values (quantile_cont: Hyndman & Fan definition 7) for the
-- dashboards' distribution plots. The groups are audit_medians' without its strata (a plot spans
-- them) and with the same populations (the audit's adult age). Values are rounded to 1e-9 first:
-- study totals are parallel float sums whose last bit can differ between runs, and the pages must
-- not. Written by the audit, which holds the period's observations already, so that a site build
-- never sorts every observation again (DuckDB holds quantile states in memory: at 10M events the
-- site's read connection could not fit them in its bound); like audit_medians it runs over parts
-- of the rooms ($part of $parts, by a hash of device_key).
create or replace table audit_distribution as
with
obs as (
    select
        device_key, exam_type, quantity, unit, phantom,
        round(value, 9) as value,
        case when modality = 'MG' then 'all'
             when patient_age_years is null then 'unknown_age'
             when patient_age_years >= $adult_min_age then 'adult'
             else 'paediatric' end as population
    from audit_observation
    where study_date >= $date_from and study_date < $date_to
      and hash(device_key) % $parts = $part   -- one part of the rooms (pipeline.audit._by_parts)
)
select device_key, exam_type, quantity, unit, population, phantom, n, value_min,
       q[1] as p05, q[2] as p25, q[3] as median, q[4] as p75, q[5] as p95, value_max
from (
    select
        device_key, exam_type, quantity, unit, population, phantom,
        count(*) as n,
        min(value) as value_min,
        -- one sort per group for the five order statistics (a list of quantiles), not five
        quantile_cont(value, [0.05, 0.25, 0.5, 0.75, 0.95]) as q,
        max(value) as value_max
    from obs
    group by all
)

-- columns:
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   quantity: audited quantity (as in audit_observation): dlp, ctdivol, dap, dose_rp,
--     fluoro_time, agd, ka_e or entrance_dose
--   unit: unit of value (and of the medians and reference values of the row), UCUM-like text: mGy,
--     mGy.cm, Gy.cm2, s, mSv
--   population: adult, paediatric, unknown_age (no age: never pooled with adults) or all
--   phantom: CTDIvol phantom of the group (head_16cm, body_32cm, mixed); NULL for other quantities
--   n: audited values in the group
--   value_min: smallest value [unit column]
--   p05: 5th percentile [unit column]
--   p25: 25th percentile [unit column]
--   median: median [unit column]
--   p75: 75th percentile [unit column]
--   p95: 95th percentile [unit column]
--   value_max: largest value [unit column]
