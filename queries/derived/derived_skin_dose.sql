-- grain: one row per RF/XA study x device with an event carrying Dose (RP): the peak skin dose
-- model's result (pipeline/skin_dose.py), computed when an ingest run or network merge touches
-- the study, never again by an audit; the audit's skin_dose joins it with study_dose for the
-- period. Columns as in skin_dose (queries/audit/create_skin_dose.sql).
create table if not exists derived_skin_dose (
    study_key varchar,
    device_key varchar,
    psd_mgy double,
    method varchar,
    n_events bigint,
    n_events_with_geometry bigint,
    ka_r_total_mgy double,
    psd_to_ka_r double,
    is_upper_bound boolean,
    upper_bound_part_mgy double,
    phantom varchar,
    factor_sources varchar,
    uncertainty_note varchar
)
