-- grain: one row per loaded dose object (SOP Instance UID)
create table if not exists raw_dose_object (
    sop_instance_uid varchar,
    sha256 varchar,
    path varchar,
    sop_class_uid varchar,
    object_kind varchar,       -- rdsr_ct | rdsr_projection | rdsr_enhanced | dose_screen | image_header
    modality varchar,          -- irradiating modality: CT DX CR RF XA MG
    study_key varchar,
    patient_key varchar,
    device_key varchar,
    content_datetime timestamp,
    instance_number bigint,
    source_of_dose_information varchar,
    series_description varchar,
    protocol_name varchar,
    body_part varchar,
    study_date date,
    study_description varchar,
    patient_age_years double,
    patient_sex varchar,
    patient_weight_kg double,
    patient_height_m double,
    n_ct_events bigint,
    n_projection_events bigint,
    run_id varchar,
    primary key (sop_instance_uid)
);
