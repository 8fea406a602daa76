-- grain: none; drops the temporary table of dash_materialise_study_dose.sql at the end of a site
-- build, so the connection sees the warehouse's own view again
drop table if exists temp.main.study_dose;
