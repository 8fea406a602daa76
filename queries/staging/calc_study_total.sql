-- grain: one row per study and irradiating device: the computation behind the public study_dose,
-- without the site (device, from the site map) and the exam type (stg_exam_match, from the exam
-- rules), which depend on the configuration; kept as the table derived_study_total, refreshed per
-- ingest run for the studies it touched (pipeline/warehouse/derived.py)
-- Totals come from the deduplicated events (irradiation_event). Where a report's events lack a
-- value (e.g. a NULL kept for a missing unit) the latest report's stated accumulated total is
-- used instead.
-- dlp_total_mgy_cm and dlp_method: 'reported' (the report's or dose screen's stated total,
-- used when events lack a DLP and the total is larger), 'event_sum' (sum of the events' DLP),
-- 'estimated_from_images' (a CT study known only from image headers: the sum over its
-- non-localizer series, reconstructions counted once, of mean CTDIvol x covered length; see
-- stg_ct_image_series: a lower bound); NULL when no DLP is known or for other modalities.
-- ctdivol_mgy: scanning-length-weighted mean of Mean CTDIvol over spiral and sequenced
-- acquisitions (localizers, constant-angle and stationary acquisitions excluded):
-- sum(CTDIvol_i * L_i) / sum(L_i). Without scanning lengths (dose screens) L_i = DLP_i /
-- CTDIvol_i, which gives sum(DLP_i) / sum(DLP_i / CTDIvol_i) over the non-localizer events; a
-- study known only from image headers takes the highest CTDIvol of each non-localizer series,
-- then the mean over its series (reconstructions counted once). ctdi_phantom is the phantom of
-- those acquisitions ('mixed' if they differ).
-- entrance_dose_total_mgy: sum of the events' image-header Entrance Dose (mGy); a surface dose,
-- kept apart from dose_rp_total_mgy, the reference-point air kerma (Ka,r) of dose reports.
-- exam_type: the standard exam type the rules map the study to (NULL when unmapped).
create or replace view calc_study_total as
with
events as (
    select * from calc_irradiation_event
),
latest_report as (
    select study_key, device_key, sop_instance_uid, patient_key, study_date, study_description,
           patient_age_years, patient_sex, patient_weight_kg, patient_height_m
    from raw_dose_object
    qualify row_number() over (
        partition by study_key, device_key
        order by (case object_kind when 'image_header' then 3 when 'dose_screen' then 2 else 1 end),
                 content_datetime desc nulls last,
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
header_ct as (
    select study_key, device_key,
           avg(ctdivol_max_mgy) as ctdivol_mgy,
           case when count(*) = count(dlp_estimate_mgy_cm) then sum(dlp_estimate_mgy_cm) end
               as dlp_mgy_cm
    from stg_ct_image_series
    where not is_localizer and not is_reconstruction and ctdivol_max_mgy is not null
    group by study_key, device_key
),
agg as (
    select
        study_key, device_key,
        any_value(modality) as modality,
        count(*) as event_count,
        count(*) filter (where source_kind = 'rdsr') as n_rdsr_events,
        count(*) filter (where source_kind = 'dose_screen') as n_screen_events,
        sum(dap_gy_cm2) as dap_sum, count(dap_gy_cm2) as n_dap,
        sum(dose_rp_mgy) as rp_sum, count(dose_rp_mgy) as n_rp,
        sum(entrance_dose_mgy) as entrance_dose_total_mgy,
        sum(dlp_mgy_cm) as dlp_sum, count(dlp_mgy_cm) as n_dlp,
        count(*) filter (where event_type = 'fluoroscopy') as n_fluoro,
        sum(irradiation_duration_s) filter (where event_type = 'fluoroscopy') as fluoro_sum,
        count(irradiation_duration_s) filter (where event_type = 'fluoroscopy') as n_fluoro_time,
        sum(ctdivol_mgy * scanning_length_mm)
            filter (where event_type in ('spiral', 'sequenced')) as ctdi_length,
        sum(scanning_length_mm)
            filter (where event_type in ('spiral', 'sequenced') and ctdivol_mgy is not null) as length_sum,
        sum(dlp_mgy_cm) filter (where scanning_length_mm is null and ctdivol_mgy > 0
                                  and dlp_mgy_cm > 0 and coalesce(event_type, '') not in
                                  ('constant_angle', 'stationary')) as screen_dlp,
        sum(dlp_mgy_cm / ctdivol_mgy) filter (where scanning_length_mm is null and ctdivol_mgy > 0
                                  and dlp_mgy_cm > 0 and coalesce(event_type, '') not in
                                  ('constant_angle', 'stationary')) as screen_length_cm,
        max(ctdivol_mgy) as ctdivol_max_mgy,
        count(distinct ctdi_phantom) filter (where coalesce(event_type, '') not in
                                             ('constant_angle', 'stationary')) as n_phantoms,
        min(ctdi_phantom) filter (where coalesce(event_type, '') not in
                                  ('constant_angle', 'stationary')) as main_phantom,
        sum(agd_mgy) as agd_total_mgy,
        count(distinct sop_instance_uid) as n_reports
    from events
    group by study_key, device_key
),
chosen as (
    select agg.*,
           s.dap_total_gy_cm2 as stated_dap, s.dose_rp_total_mgy as stated_rp,
           s.fluoro_time_total_s as stated_fluoro, s.dlp_total_mgy_cm as stated_dlp,
           h.ctdivol_mgy as header_ctdivol, h.dlp_mgy_cm as header_dlp,
           case when agg.modality <> 'CT' then null
                when s.dlp_total_mgy_cm is not null and agg.n_dlp < agg.event_count
                     and s.dlp_total_mgy_cm > coalesce(agg.dlp_sum, 0) then 'reported'
                when agg.dlp_sum is not null then 'event_sum'
                when s.dlp_total_mgy_cm is not null then 'reported'
                when h.dlp_mgy_cm is not null then 'estimated_from_images'
           end as dlp_method
    from agg
    left join stated as s using (study_key, device_key)
    left join header_ct as h using (study_key, device_key)
)
select
    c.study_key,
    r.patient_key,
    c.device_key,
    c.modality,
    r.study_date,
    r.study_description,
    r.patient_age_years,
    r.patient_sex,
    r.patient_weight_kg,
    r.patient_height_m,
    c.event_count,
    case when c.n_dap = c.event_count and c.n_dap > 0 then c.dap_sum
         else coalesce(c.stated_dap, c.dap_sum) end as dap_total_gy_cm2,
    case when c.n_rp = c.event_count and c.n_rp > 0 then c.rp_sum
         else coalesce(c.stated_rp, c.rp_sum) end as dose_rp_total_mgy,
    case when c.n_fluoro = 0 then c.stated_fluoro
         when c.n_fluoro_time = c.n_fluoro then c.fluoro_sum
         else coalesce(c.stated_fluoro, c.fluoro_sum) end as fluoro_time_total_s,
    case c.dlp_method when 'reported' then c.stated_dlp
                      when 'event_sum' then c.dlp_sum
                      when 'estimated_from_images' then c.header_dlp end as dlp_total_mgy_cm,
    coalesce(c.ctdi_length / nullif(c.length_sum, 0),
             c.screen_dlp / nullif(c.screen_length_cm, 0),
             c.header_ctdivol) as ctdivol_mgy,
    case when c.n_rdsr_events > 0 then 'rdsr' when c.n_screen_events > 0 then 'dose_screen'
         else 'image_header' end as source_kind,
    c.ctdivol_max_mgy,
    case when c.n_phantoms = 1 then c.main_phantom when c.n_phantoms > 1 then 'mixed' end
        as ctdi_phantom,
    c.agd_total_mgy,
    c.n_reports,
    c.entrance_dose_total_mgy,
    c.dlp_method
from chosen as c
left join latest_report as r using (study_key, device_key)
