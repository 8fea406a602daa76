-- grain: none; drops the temporary tables of dash_period_studies.sql, dash_period_unmapped.sql,
-- dash_period_file_groups.sql and dash_period_files.sql once the SELECTs that read them have
-- run (and again at the end of a site build, whatever happened)
drop table if exists temp.main.dash_period_study;
drop table if exists temp.main.dash_period_unmapped;
drop table if exists temp.main.dash_period_file_group;
drop table if exists temp.main.dash_period_file;
