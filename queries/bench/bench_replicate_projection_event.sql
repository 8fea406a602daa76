-- grain: one row per projection event per report and copy k; doses jittered per copy (0.7-1.3)
insert into raw_projection_event by name
select e.* replace (
    e.event_uid || '~' || c.k as event_uid,
    e.sop_instance_uid || '~' || c.k as sop_instance_uid,
    e.study_key || '~' || c.k as study_key,
    case when c.k % $rooms = 0 then e.device_key else e.device_key || '~' || (c.k % $rooms) end as device_key,
    e.dap_gy_cm2 * (0.7 + 0.6 * (hash(e.study_key, c.k) % 1000) / 1000.0) as dap_gy_cm2,
    e.dose_rp_mgy * (0.7 + 0.6 * (hash(e.study_key, c.k) % 1000) / 1000.0) as dose_rp_mgy,
    e.agd_mgy * (0.7 + 0.6 * (hash(e.study_key, c.k) % 1000) / 1000.0) as agd_mgy
)
from raw_projection_event as e, range(1, $copies) as c (k)
where e.sop_instance_uid not like '%~%'
