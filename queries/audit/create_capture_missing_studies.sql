-- grain: one row per (archive study, modality, station) without any dose object in the warehouse; pseudonymous study_key only
create or replace table capture_missing_studies as
select period, study_key, study_date, modality, station_name, device_key
from incoming_capture_missing_studies

-- columns:
--   period: the checked period (YYYY-MM, or first..last day)
--   study_key: pseudonymous study key of the archive study (keyed HMAC-SHA256 of its Study
--     Instance UID, the same key as ingest)
--   study_date: Study Date (0008,0020) of the archive study
--   modality: Modality (0008,0060)
--   station_name: Station Name (0008,1010)
--   device_key: the warehouse device of that Station Name (NULL: none known)
