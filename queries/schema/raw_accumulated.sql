-- grain: one row per report and plane (TID 10002 per plane; TID 10012 as plane ct)
-- key (sop_instance_uid, plane): kept by the load, not by a primary key. A report's rows arrive
-- only with the report, which is loaded once (a SOP Instance UID already in raw_dose_object is a
-- duplicate), and each batch keeps the first row of each key (pipeline/warehouse/load.py, GRAIN).
-- An index on these random UIDs was read nearly whole by every batch's insert, so it stayed in
-- memory and grew with the warehouse (bench/ingest_scale.py). A warehouse created with the
-- primary key keeps it (and its memory); its loads work the same
create table if not exists raw_accumulated (
    sop_instance_uid varchar,
    plane varchar,
    dap_total_gy_cm2 double,
    dose_rp_total_mgy double,
    fluoro_dap_total_gy_cm2 double,
    fluoro_dose_rp_total_mgy double,
    fluoro_time_total_s double,
    acquisition_dap_total_gy_cm2 double,
    acquisition_dose_rp_total_mgy double,
    acquisition_time_total_s double,
    radiographic_frames double,
    reference_point_definition varchar,
    calibration_factor double,
    calibration_uncertainty_pct double,
    calibration_datetime timestamp,
    agd_left_mgy double,
    agd_right_mgy double,
    dlp_total_mgy_cm double,
    events_reported double,
    study_key varchar,
    device_key varchar,
    run_id varchar
);
