-- grain: one row per irradiation event per report that carries it (TID 10013 or CT image header)
-- key (event_uid, sop_instance_uid): kept by the load, not by a primary key. A report's rows arrive
-- only with the report, which is loaded once (a SOP Instance UID already in raw_dose_object is a
-- duplicate), and each batch keeps the first row of each key (pipeline/warehouse/load.py, GRAIN).
-- An index on these random UIDs was read nearly whole by every batch's insert, so it stayed in
-- memory and grew with the warehouse (bench/ingest_scale.py). A warehouse created with the
-- primary key keeps it (and its memory); its loads work the same
create table if not exists raw_ct_event (
    event_uid varchar,
    sop_instance_uid varchar,
    source_kind varchar,
    acquisition_protocol varchar,
    target_region varchar,
    target_region_code varchar,
    ct_acquisition_type varchar,
    started_at timestamp,
    exposure_time_s double,
    scanning_length_mm double,
    top_z_scanning_length_mm double,   -- TID 10014 table positions, mm
    bottom_z_scanning_length_mm double,
    nominal_single_collimation_mm double,
    nominal_total_collimation_mm double,
    pitch_factor double,
    number_of_sources bigint,
    kvp double,
    tube_current_ma double,
    max_tube_current_ma double,
    exposure_time_per_rotation_s double,
    kvp_source_b double,
    tube_current_ma_source_b double,
    ctdivol_mgy double,
    ctdi_phantom varchar,
    dlp_mgy_cm double,
    ssde_mgy double,
    water_equivalent_diameter_mm double,
    dose_check_alert_ctdivol_mgy double,
    dose_check_alert_dlp_mgy_cm double,
    dose_check_notification_ctdivol_mgy double,
    dose_check_notification_dlp_mgy_cm double,
    series_instance_uid varchar,       -- image headers: the series the row's images belong to
    image_z_min_mm double,             -- image headers: lowest / highest image z position
    image_z_max_mm double,
    slice_thickness_mm double,
    n_images bigint,                   -- images (frames) the row stands for
    study_key varchar,
    device_key varchar,
    run_id varchar
);
-- columns added after the first release: a warehouse made before them gains them here
alter table raw_ct_event add column if not exists series_instance_uid varchar;
alter table raw_ct_event add column if not exists image_z_min_mm double;
alter table raw_ct_event add column if not exists image_z_max_mm double;
alter table raw_ct_event add column if not exists slice_thickness_mm double;
alter table raw_ct_event add column if not exists n_images bigint;
alter table raw_ct_event add column if not exists top_z_scanning_length_mm double;
alter table raw_ct_event add column if not exists bottom_z_scanning_length_mm double;
