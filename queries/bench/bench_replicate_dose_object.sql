-- grain: one row per dose object and copy k (benchmark scale-up; copies spread over $rooms copies of each room)
insert into raw_dose_object by name
select d.* replace (
    d.sop_instance_uid || '~' || c.k as sop_instance_uid,
    d.study_key || '~' || c.k as study_key,
    case when c.k % $rooms = 0 then d.device_key else d.device_key || '~' || (c.k % $rooms) end as device_key,
    d.patient_key || '~' || c.k as patient_key,
    d.path || '~' || c.k as path
)
from raw_dose_object as d, range(1, $copies) as c (k)
where d.sop_instance_uid not like '%~%'
