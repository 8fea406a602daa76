-- grain: none; drops the temporary tables of dash_materialise_study_dose.sql and
-- dash_period_files.sql once the SELECTs that read them have run (and again at the end of a site
-- build, whatever happened), so the connection sees the warehouse's own view again
drop table if exists temp.main.study_dose;
drop table if exists temp.main.dash_period_file;
