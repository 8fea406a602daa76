-- grain: one row per year x device x exam type, adult CT studies with a DLP
-- question: yearly median CT DLP per device and exam type (adults)
-- columns: year, site, device_key, exam_type, n_studies, median_dlp_mgy_cm, p25_dlp_mgy_cm,
--   p75_dlp_mgy_cm, n_dlp_estimated
-- parameters: adult_min_age=16
-- note: n_dlp_estimated counts studies known only from image headers, whose DLP is a lower
--   bound (study_dose.dlp_method = 'estimated_from_images'); patients of unknown age are left
--   out. A median above a diagnostic reference level is a reason to review, not a dose limit.
-- run: kerma sql --warehouse kerma-demo/kerma.duckdb --file queries/examples/ct_dlp_yearly_median.sql --param adult_min_age=16
select
    year(s.study_date) as year,
    any_value(s.site) as site,
    s.device_key,
    s.exam_type,
    count(*) as n_studies,
    quantile_cont(s.dlp_total_mgy_cm, 0.5) as median_dlp_mgy_cm,
    quantile_cont(s.dlp_total_mgy_cm, 0.25) as p25_dlp_mgy_cm,
    quantile_cont(s.dlp_total_mgy_cm, 0.75) as p75_dlp_mgy_cm,
    count(*) filter (where s.dlp_method = 'estimated_from_images') as n_dlp_estimated
from study_dose as s
where s.modality = 'CT'
  and s.exam_type is not null
  and s.dlp_total_mgy_cm is not null
  and s.patient_age_years >= $adult_min_age
group by year(s.study_date), s.device_key, s.exam_type
order by s.exam_type, s.device_key, year
