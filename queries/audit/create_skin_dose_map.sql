-- grain: one row per study x device x skin cell with dose > 0, for each RF/XA study whose peak
-- skin dose reaches a peak-skin-dose alert threshold: the unrolled phantom surface
-- (around_mm: arc length from the front midline via the patient's right, the back at the centre;
-- along_mm: towards the head), cell dose in mGy (pipeline/skin_dose.py)
create or replace table skin_dose_map as select * from incoming_skin_dose_map

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   around_mm: arc length round the phantom from the front midline via the patient's right (the back
--     at the centre)
--   along_mm: position along the phantom towards the head
--   dose_mgy: skin dose in the cell
