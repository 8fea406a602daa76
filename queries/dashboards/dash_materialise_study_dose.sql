-- grain: one row per row of the view study_dose, computed once per site build (dashboards.site)
-- A temporary table of the same name hides the view for the rest of this read-only connection
-- (DuckDB looks names up in the temp catalog first), so the dashboard SELECTs below, and the
-- views they read, use these rows instead of recomputing the view for each SELECT.
create temp table study_dose as select * from study_dose
