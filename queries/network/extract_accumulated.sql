-- grain: one row per report and plane of the extract's dose objects (extract_dose_object registered)
select *
from raw_accumulated
where sop_instance_uid in (select sop_instance_uid from extract_dose_object)
order by sop_instance_uid, plane
