-- grain: one row per study and irradiating device (study_dose) up to the period end, computed
-- once per audit run
-- A temporary table of the same name hides the view for the rest of this connection, so every
-- audit query below reads the same rows without joining the kept totals (derived_study_total) to
-- the site map and exam matches again (DuckDB looks names up in the temp catalog first).
-- Only the columns and rows the audit reads: every statement of the run reads study_dose up to
-- the period end (study_estimate, the CT exam ages and data_alerts read the whole history before
-- it, the others the period), and no statement reads its texts (study description, matched exam
-- text) or the other totals; a column left out here is an error where a query names it, never a
-- silent change. Every column of every study took 5.5 CPU-s at 10M events and spilled, these
-- 3.4 (measured, no other source).
create temp table study_dose as
select study_key, patient_key, device_key, site, modality, study_date, exam_type,
       patient_age_years, dap_total_gy_cm2, dose_rp_total_mgy, fluoro_time_total_s,
       dlp_total_mgy_cm, ctdivol_mgy, ctdi_phantom
from study_dose
where study_date < $date_to
