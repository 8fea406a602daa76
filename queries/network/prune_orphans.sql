-- merge: studies and devices left without any dose object (their extract was replaced) go
delete from raw_study
where study_key not in (select study_key from raw_dose_object where study_key is not null);
delete from raw_device
where device_key not in (select device_key from raw_dose_object where device_key is not null)
