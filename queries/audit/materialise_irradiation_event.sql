-- grain: one row per unique irradiation event (irradiation_event), computed once per audit run
-- A temporary table hiding the view for this connection (see materialise_stg_exam_text.sql).
create temp table irradiation_event as select * from irradiation_event
