-- grain: one row per text a study (unit_kind = study) or a projection event (unit_kind = event)
-- offers to the exam rules, per field (queries/staging/calc_exam_text.sql computes it; kept as the
-- table derived_exam_text, refreshed per ingest run for the studies it touched)
create or replace view stg_exam_text as select * from derived_exam_text
