-- grain: one row per study key with at least one dose object in the warehouse
select distinct study_key from raw_dose_object where study_key is not null
