-- grain: one row per row of the view study_dose, computed once per site build (dashboards.site)
-- A temporary table of the same name hides the view for the rest of this read-only connection
-- (DuckDB looks names up in the temp catalog first), so the dashboard SELECTs below, and the
-- views they read, use these rows instead of recomputing the view for each SELECT. Only the
-- columns those SELECTs read are kept (at 10M events 3.2 CPU-s against 6.0 for every column;
-- measured, no other source): a SELECT that needs another fails to bind, so add it here.
create temp table study_dose as
select study_key, device_key, site, modality, study_date, study_description, exam_type,
       patient_age_years, patient_weight_kg, patient_height_m
from study_dose
