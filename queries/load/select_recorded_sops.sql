-- load: every SOP Instance UID the warehouse has recorded, whatever the file's status
select distinct sop_instance_uid from raw_source_object where sop_instance_uid is not null
