-- grain (computation behind derived_object_study): one row per SOP instance (dose object) x study
-- x device of the deduplicated irradiation events (derived_irradiation_event), with the date of
-- that study (derived_study_total, the study_date of study_dose). The site build counts the input
-- files of an audit period from these rows (queries/dashboards/dash_period_files.sql) instead of
-- joining every event to its study. An event whose study or device key is NULL has no study total
-- to meet and gives no row. Reads the kept tables: refreshed after them, for the same studies.
create or replace view calc_object_study as
select e.sop_instance_uid, e.study_key, e.device_key, any_value(t.study_date) as study_date
from derived_irradiation_event as e
join derived_study_total as t on t.study_key = e.study_key and t.device_key = e.device_key
group by e.sop_instance_uid, e.study_key, e.device_key
