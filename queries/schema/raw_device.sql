-- grain: one row per irradiating device (first report that named it wins)
create table if not exists raw_device (
    device_key varchar,
    modality varchar,
    device_observer_uid varchar,
    observer_name varchar,
    manufacturer varchar,
    model varchar,
    serial_number varchar,
    physical_location varchar,
    station_name varchar,
    institution_name varchar,
    department_name varchar,
    header_manufacturer varchar,
    header_model varchar,
    header_serial_number varchar,
    software_versions varchar,
    first_run_id varchar,
    primary key (device_key)
);
