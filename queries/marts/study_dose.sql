-- grain: one row per study and irradiating device; public interface
-- Totals come from the deduplicated events (irradiation_event). Where a report's events lack a
-- value (e.g. a NULL kept for a missing unit) the latest report's stated accumulated total is
-- used instead. ctdivol_mgy: scanning-length-weighted mean of Mean CTDIvol over spiral and
-- sequenced acquisitions (localizers, constant-angle and stationary acquisitions excluded):
-- sum(CTDIvol_i * L_i) / sum(L_i); ctdi_phantom is their phantom ('mixed' if they differ).
-- exam_type: the standard exam type the rules map the study to (NULL when unmapped).
create or replace view study_dose as
with
events as (
    select * from irradiation_event
),
latest_report as (
    select study_key, device_key, sop_instance_uid, patient_key, study_date, study_description,
           patient_age_years, patient_sex, patient_weight_kg, patient_height_m
    from raw_dose_object
    qualify row_number() over (
        partition by study_key, device_key
        order by (object_kind <> 'image_header') desc, content_datetime desc nulls last,
                 instance_number desc nulls last, sop_instance_uid desc) = 1
),
stated as (
    select a.study_key, a.device_key,
           sum(a.dap_total_gy_cm2) as dap_total_gy_cm2,
           sum(a.dose_rp_total_mgy) as dose_rp_total_mgy,
           sum(a.fluoro_time_total_s) as fluoro_time_total_s,
           sum(a.dlp_total_mgy_cm) as dlp_total_mgy_cm
    from raw_accumulated as a
    join latest_report as r using (sop_instance_uid)
    where a.plane <> 'all'
    group by a.study_key, a.device_key
),
agg as (
    select
        study_key, device_key,
        any_value(modality) as modality,
        count(*) as event_count,
        count(*) filter (where source_kind = 'rdsr') as n_rdsr_events,
        sum(dap_gy_cm2) as dap_sum, count(dap_gy_cm2) as n_dap,
        sum(dose_rp_mgy) as rp_sum, count(dose_rp_mgy) as n_rp,
        sum(dlp_mgy_cm) as dlp_sum, count(dlp_mgy_cm) as n_dlp,
        count(*) filter (where event_type = 'fluoroscopy') as n_fluoro,
        sum(irradiation_duration_s) filter (where event_type = 'fluoroscopy') as fluoro_sum,
        count(irradiation_duration_s) filter (where event_type = 'fluoroscopy') as n_fluoro_time,
        sum(ctdivol_mgy * scanning_length_mm)
            filter (where event_type in ('spiral', 'sequenced')) as ctdi_length,
        sum(scanning_length_mm)
            filter (where event_type in ('spiral', 'sequenced') and ctdivol_mgy is not null) as length_sum,
        max(ctdivol_mgy) as ctdivol_max_mgy,
        count(distinct ctdi_phantom) filter (where event_type in ('spiral', 'sequenced')) as n_phantoms,
        min(ctdi_phantom) filter (where event_type in ('spiral', 'sequenced')) as main_phantom,
        sum(agd_mgy) as agd_total_mgy,
        count(distinct sop_instance_uid) as n_reports
    from events
    group by study_key, device_key
)
select
    agg.study_key,
    r.patient_key,
    agg.device_key,
    d.site,
    agg.modality,
    r.study_date,
    r.study_description,
    r.patient_age_years,
    r.patient_sex,
    r.patient_weight_kg,
    r.patient_height_m,
    agg.event_count,
    case when agg.n_dap = agg.event_count and agg.n_dap > 0 then agg.dap_sum
         else coalesce(s.dap_total_gy_cm2, agg.dap_sum) end as dap_total_gy_cm2,
    case when agg.n_rp = agg.event_count and agg.n_rp > 0 then agg.rp_sum
         else coalesce(s.dose_rp_total_mgy, agg.rp_sum) end as dose_rp_total_mgy,
    case when agg.n_fluoro = 0 then s.fluoro_time_total_s
         when agg.n_fluoro_time = agg.n_fluoro then agg.fluoro_sum
         else coalesce(s.fluoro_time_total_s, agg.fluoro_sum) end as fluoro_time_total_s,
    case when agg.modality <> 'CT' then null
         when s.dlp_total_mgy_cm is not null and agg.n_dlp < agg.event_count
              and s.dlp_total_mgy_cm > coalesce(agg.dlp_sum, 0) then s.dlp_total_mgy_cm
         else coalesce(agg.dlp_sum, s.dlp_total_mgy_cm) end as dlp_total_mgy_cm,
    agg.ctdi_length / nullif(agg.length_sum, 0) as ctdivol_mgy,
    case when agg.n_rdsr_events > 0 then 'rdsr' else 'image_header' end as source_kind,
    agg.ctdivol_max_mgy,
    case when agg.n_phantoms = 1 then agg.main_phantom when agg.n_phantoms > 1 then 'mixed' end
        as ctdi_phantom,
    x.exam_type,
    x.matched_field as exam_matched_field,
    x.matched_text as exam_matched_text,
    agg.agd_total_mgy,
    agg.n_reports
from agg
left join latest_report as r using (study_key, device_key)
left join stated as s using (study_key, device_key)
left join device as d using (device_key)
left join stg_exam_match as x
  on x.unit_kind = 'study' and x.study_key = agg.study_key and x.device_key = agg.device_key
