-- grain: one row per study x device x skin cell with dose > 0, for each RF/XA study whose peak
-- skin dose reaches a peak-skin-dose alert threshold: the unrolled phantom surface
-- (around_mm: arc length from the front midline via the patient's right, the back at the centre;
-- along_mm: towards the head), cell dose in mGy (pipeline/skin_dose.py)
create or replace table skin_dose_map as select * from incoming_skin_dose_map
