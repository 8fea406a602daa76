-- grain: one row per value-level issue; public interface
create or replace view value_issue as
select i.issue_id, i.sop_instance_uid, o.study_key, o.device_key, i.event_uid, i.kind,
       i.concept_code, i.detail, i.raw_value, i.raw_unit, i.run_id
from raw_value_issue as i
left join raw_dose_object as o using (sop_instance_uid)
