-- grain: one row per study and irradiating device (study_dose), computed once per audit run
-- A temporary table of the same name hides the view for the rest of this connection, so every
-- audit query below reads the same rows without joining the kept totals (derived_study_total) to
-- the site map and exam matches again (DuckDB looks names up in the temp catalog first).
create temp table study_dose as select * from study_dose
