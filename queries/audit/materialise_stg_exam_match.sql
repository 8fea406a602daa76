-- grain: one row per study or projection event a rule maps to an exam type (stg_exam_match), computed once per audit run
-- A temporary table hiding the view for this connection (see materialise_study_dose.sql).
create temp table stg_exam_match as select * from stg_exam_match
