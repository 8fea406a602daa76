-- grain: one row per device x exam type x quantity (x phantom) x calendar month, up to the period end
create or replace table monthly_medians as
select site, device_key, exam_type, quantity, unit, phantom, month, n,
       q[1] as median, q[2] as p25, q[3] as p75
from (
    -- one sort per group for the three order statistics (a list of quantiles), not three
    -- site follows from device_key (device: one row per device_key): carried, not grouped on
    select any_value(site) as site, device_key, exam_type, quantity, unit, phantom,
           period as month, count(*) as n, quantile_cont(value, [0.5, 0.25, 0.75]) as q
    from audit_observation
    where study_date < $date_to
      and patient_age_years >= $adult_min_age  -- unknown age is not adult
      and hash(device_key) % $parts = $part     -- one part of the rooms (pipeline.audit._by_parts)
    group by device_key, exam_type, quantity, unit, phantom, period
)
order by device_key, exam_type, quantity, month

-- columns:
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   quantity: audited quantity (as in audit_observation): dlp, ctdivol, dap, dose_rp,
--     fluoro_time, agd, ka_e or entrance_dose
--   unit: unit of value (and of the medians and reference values of the row), UCUM-like text: mGy,
--     mGy.cm, Gy.cm2, s, mSv
--   phantom: CTDIvol phantom of the group (head_16cm, body_32cm, mixed); NULL for other quantities
--   month: calendar month (YYYY-MM)
--   n: audited values of adults in the month
--   median: median [unit column]
--   p25: 25th percentile [unit column]
--   p75: 75th percentile [unit column]
