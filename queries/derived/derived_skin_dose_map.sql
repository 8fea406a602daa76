-- grain: one row per study x device x skin cell with dose > 0, for each study of derived_skin_dose
-- whose peak skin dose reaches pipeline.warehouse.derived.MAP_FLOOR_MGY (the lowest default
-- peak-skin-dose alert threshold); an audit with a lower threshold computes the missing maps
create table if not exists derived_skin_dose_map (
    study_key varchar,
    device_key varchar,
    around_mm double,
    along_mm double,
    dose_mgy double
)
