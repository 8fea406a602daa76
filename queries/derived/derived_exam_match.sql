-- grain: one row per study or projection event a rule maps to an exam type: calc_exam_match kept
-- as a table, for the exam rules in raw_exam_rule when it was refreshed (derived_state.rules);
-- replacing the rules recomputes it whole, an ingest run for the studies it touched. Read through
-- the view stg_exam_match.
create table if not exists derived_exam_match as select * from calc_exam_match limit 0
