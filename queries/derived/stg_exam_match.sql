-- grain: one row per study (unit_kind = study) or projection event (unit_kind = event) that a rule
-- maps to an exam type: the first match by field priority, then rule order
-- (queries/derived/calc_exam_match.sql computes it; kept as the table derived_exam_match,
-- recomputed when the exam rules are replaced and per ingest run for the studies it touched)
create or replace view stg_exam_match as select * from derived_exam_match
