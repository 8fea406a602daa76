-- grain: one row per text a study or projection event offers to the exam rules (stg_exam_text), computed once per audit run
-- A temporary table of the same name hides the view for the rest of this connection, so every
-- audit query below reads the same rows without recomputing them (DuckDB looks names up in the
-- temp catalog first). Created before the views that read it.
create temp table stg_exam_text as select * from stg_exam_text
