-- grain: one row per calendar month x device x exam type, DX and CR radiographs with a kVp
-- question: does the tube voltage (kVp) of radiographs drift, per device and exam type?
-- columns: month, site, device_key, modality, exam_type, n_exposures, median_kvp,
--   first_month_median_kvp, kvp_change_from_first_month
-- parameters: none
-- note: kvp_change_from_first_month is median_kvp minus the median of the series' first month
--   (kV). A change of technique is a prompt to look at dose and image quality together (e.g.
--   after a detector replacement), not a fault by itself. The exam type is the study's.
-- run: kerma sql --warehouse kerma-demo/kerma.duckdb --file queries/examples/radiography_kvp_drift.sql
with
monthly as (
    select
        strftime(s.study_date, '%Y-%m') as month,
        any_value(s.site) as site,
        e.device_key,
        e.modality,
        s.exam_type,
        count(*) as n_exposures,
        quantile_cont(e.kvp, 0.5) as median_kvp
    from irradiation_event as e
    join study_dose as s using (study_key, device_key)
    where e.modality in ('DX', 'CR') and e.kvp is not null and s.exam_type is not null
    group by strftime(s.study_date, '%Y-%m'), e.device_key, e.modality, s.exam_type
)
select
    month, site, device_key, modality, exam_type, n_exposures, median_kvp,
    first_value(median_kvp) over series as first_month_median_kvp,
    median_kvp - first_value(median_kvp) over series as kvp_change_from_first_month
from monthly
window series as (partition by device_key, exam_type order by month)
order by device_key, exam_type, month
