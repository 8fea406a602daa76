-- grain: one row per device and event table: the floor, a bare GROUP BY median() over the events
select 'ct' as events, device_key, count(*) as n, median(ctdivol_mgy) as median_ctdivol_mgy,
       median(dlp_mgy_cm) as median_dlp_mgy_cm, null as median_dap_gy_cm2, null as median_dose_rp_mgy
from raw_ct_event
group by device_key
union all
select 'projection' as events, device_key, count(*) as n, null, null, median(dap_gy_cm2),
       median(dose_rp_mgy)
from raw_projection_event
group by device_key
