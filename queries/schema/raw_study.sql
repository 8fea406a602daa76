-- grain: one row per pseudonymised study (first report wins)
create table if not exists raw_study (
    study_key varchar,
    patient_key varchar,
    study_date date,
    study_time time,
    study_description varchar,
    procedure_code varchar,
    procedure_meaning varchar,
    patient_age_years double,
    patient_sex varchar,
    patient_weight_kg double,
    patient_height_m double,
    first_run_id varchar,
    primary key (study_key)
);
