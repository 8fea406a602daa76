-- grain: none; drops the run's CT acquisitions and accumulated CTDIvol (create_ct_acquisition.sql,
-- create_ct_accumulated.sql) once dose_alerts has read them, so their blocks do not stay in the
-- audit's memory for the statements after it
drop table if exists temp.main.ct_acquisition;
drop table if exists temp.main.ct_accumulated;
