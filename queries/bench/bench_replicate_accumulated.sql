-- grain: one row per report, plane and copy k (stated totals, jittered like the events)
insert into raw_accumulated by name
select a.* replace (
    a.sop_instance_uid || '~' || c.k as sop_instance_uid,
    a.study_key || '~' || c.k as study_key,
    case when c.k % $rooms = 0 then a.device_key else a.device_key || '~' || (c.k % $rooms) end as device_key,
    a.dap_total_gy_cm2 * (0.7 + 0.6 * (hash(a.study_key, c.k) % 1000) / 1000.0) as dap_total_gy_cm2,
    a.dose_rp_total_mgy * (0.7 + 0.6 * (hash(a.study_key, c.k) % 1000) / 1000.0) as dose_rp_total_mgy,
    a.dlp_total_mgy_cm * (0.7 + 0.6 * (hash(a.study_key, c.k) % 1000) / 1000.0) as dlp_total_mgy_cm
)
from raw_accumulated as a, range(1, $copies) as c (k)
where a.sop_instance_uid not like '%~%'
