-- grain: one row per value-level issue of the extract's dose objects (extract_dose_object registered)
select *
from raw_value_issue
where sop_instance_uid in (select sop_instance_uid from extract_dose_object)
order by issue_id
