-- grain: one row per calendar quarter x modality x exam type, XA and RF studies with a
--   fluoroscopy time
-- question: fluoroscopy time per interventional and fluoroscopic procedure, by quarter
-- columns: quarter, modality, exam_type, n_studies, median_fluoro_time_s, p75_fluoro_time_s,
--   max_fluoro_time_s, median_dap_gy_cm2
-- parameters: none
-- note: quarter is YYYY-Qn of the study date. Fluoroscopy time alone is a poor surrogate of
--   patient dose: read it beside the DAP (and Ka,r); a long procedure is not a finding by itself.
-- run: kerma sql --warehouse kerma-demo/kerma.duckdb --file queries/examples/fluoro_time_by_quarter.sql
select
    cast(year(s.study_date) as varchar) || '-Q' || cast(quarter(s.study_date) as varchar) as quarter,
    s.modality,
    s.exam_type,
    count(*) as n_studies,
    quantile_cont(s.fluoro_time_total_s, 0.5) as median_fluoro_time_s,
    quantile_cont(s.fluoro_time_total_s, 0.75) as p75_fluoro_time_s,
    max(s.fluoro_time_total_s) as max_fluoro_time_s,
    quantile_cont(s.dap_total_gy_cm2, 0.5) as median_dap_gy_cm2
from study_dose as s
where s.modality in ('XA', 'RF') and s.exam_type is not null and s.fluoro_time_total_s is not null
group by all
order by s.modality, s.exam_type, quarter
