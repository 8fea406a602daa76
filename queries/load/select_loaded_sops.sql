-- load: every SOP Instance UID already loaded
select sop_instance_uid from raw_dose_object
