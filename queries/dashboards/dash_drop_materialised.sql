-- grain: none; drops the temporary tables of dash_materialise_*.sql at the end of a site build,
-- so the connection sees the warehouse's own views again
drop table if exists temp.main.study_dose;
drop table if exists temp.main.stg_exam_match;
drop table if exists temp.main.irradiation_event;
