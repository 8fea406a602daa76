-- grain: one row per (archive study, modality, station) without any dose object in the warehouse; pseudonymous study_key only
create or replace table capture_missing_studies as
select period, study_key, study_date, modality, station_name, device_key
from incoming_capture_missing_studies
