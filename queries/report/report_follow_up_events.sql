-- grain: one row per irradiation event of a follow-up study the report shows in detail (table
-- report_detail_study, registered by pipeline/report/read.py)
select
    e.study_key,
    e.started_at,
    e.event_type,
    e.acquisition_protocol,
    e.target_region,
    e.acquisition_plane,
    e.kvp,
    e.ctdivol_mgy,
    e.dlp_mgy_cm,
    e.ctdi_phantom,
    e.dap_gy_cm2,
    e.dose_rp_mgy,
    e.irradiation_duration_s,
    e.event_uid
from irradiation_event as e
where e.study_key in (select study_key from report_detail_study)
order by e.study_key, e.started_at nulls last, e.event_uid
