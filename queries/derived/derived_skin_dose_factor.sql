-- grain: one row per study x device x skin-dose factor of derived_skin_dose (range over the events
-- and source), as in skin_dose_factor (queries/audit/create_skin_dose_factor.sql)
create table if not exists derived_skin_dose_factor (
    study_key varchar,
    device_key varchar,
    factor varchar,
    n_events bigint,
    value_min double,
    value_max double,
    source varchar
)
