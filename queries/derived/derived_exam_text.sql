-- grain: one row per text a study or projection event offers to the exam rules: calc_exam_text kept
-- as a table (refreshed as derived_irradiation_event is); read through the view stg_exam_text.
create table if not exists derived_exam_text as select * from calc_exam_text limit 0
