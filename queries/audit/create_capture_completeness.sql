-- grain: one row per (period, modality, station_name) the archive holds studies of; public interface
-- n_archive_studies: studies in the archive (QIDO-RS); n_with_dose_object: of those, studies
-- with any dose object in the warehouse; device_key: the warehouse device of that Station Name.
create or replace table capture_completeness as
select period, modality, station_name, device_key, n_archive_studies, n_with_dose_object,
       share_with_dose_object
from incoming_capture_completeness

-- columns:
--   period: the checked period (YYYY-MM, or first..last day)
--   modality: Modality (0008,0060) of the archive's studies
--   station_name: Station Name (0008,1010) the archive reports for them
--   device_key: the warehouse device of that Station Name (NULL: none known)
--   n_archive_studies: studies the archive holds (C-FIND or QIDO-RS)
--   n_with_dose_object: of those, studies with any dose object in the warehouse
--   share_with_dose_object: n_with_dose_object / n_archive_studies
