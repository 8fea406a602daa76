-- grain: one row per study and irradiating device: calc_study_total (the totals of study_dose
-- without its site and exam type) kept as a table (refreshed as derived_irradiation_event is);
-- read through the public view study_dose.
create table if not exists derived_study_total as select * from calc_study_total limit 0
