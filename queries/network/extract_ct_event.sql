-- grain: one row per event and report of the extract's dose objects (extract_dose_object registered)
select *
from raw_ct_event
where sop_instance_uid in (select sop_instance_uid from extract_dose_object)
order by event_uid, sop_instance_uid
