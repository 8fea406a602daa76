-- grain: one row per study and irradiating device (study_dose), computed once per audit run
-- A temporary table hiding the view for this connection (see materialise_stg_exam_text.sql).
create temp table study_dose as select * from study_dose
