-- grain: one row per study x device x skin cell with dose > 0, for each RF/XA study whose peak
-- skin dose reaches a peak-skin-dose alert threshold: the unrolled phantom surface
-- (around_mm: arc length from the front midline via the patient's right, the back at the centre;
-- along_mm: towards the head), cell dose in mGy (pipeline/skin_dose.py)
-- Maps at or above derived_skin_dose_map's floor are kept there; those below it that a lower
-- threshold asks for are computed by the audit (incoming_skin_dose_map).
create or replace table skin_dose_map as
select m.study_key, m.device_key, m.around_mm, m.along_mm, m.dose_mgy
from derived_skin_dose_map as m
join skin_dose as s using (study_key, device_key)
where s.psd_mgy >= $threshold
union all by name
select study_key, device_key, around_mm, along_mm, dose_mgy from incoming_skin_dose_map

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   around_mm: arc length round the phantom from the front midline via the patient's right (the back
--     at the centre)
--   along_mm: position along the phantom towards the head
--   dose_mgy: skin dose in the cell
