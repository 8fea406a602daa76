-- grain: one row per CT acquisition of the period's studies x devices: an irradiation event with a
-- CTDIvol, localizers excluded; what the CT dose-check rules read (ct_accumulated, dose_alerts)
-- No event type: a classic CT image's header has no Acquisition Type; a localizer is typed
-- constant_angle from its Image Type (pipeline/parsing/headers.py).
-- protocol_family: brain perfusion and cardiac by the acquisition protocol text, else the body
-- region of the exam type (unmapped or neck: the CTDIvol phantom decides).
-- low_mm / high_mm / has_range: the scanning range (TID 10014 Top / Bottom Z Location of Scanning
-- Length). device_notification_mgy / device_alert_mgy: the scanner's own CT dose-check values for
-- the acquisition as recorded in its report (PS3.16 TID 10015, NEMA XR 25; NULL: none above 0).
-- Kept for the run's connection: ct_accumulated and dose_alerts each joined every event to the
-- studies before; at 10M events this table took 2.0 CPU-s, then ct_accumulated 0.9 and
-- dose_alerts 1.9, against 1.4 and 4.0 with a join each (measured, no other source).
create or replace temp table ct_acquisition as
select e.study_key, e.device_key, e.event_type, e.ctdivol_mgy, e.ctdi_phantom,
       least(e.top_z_scanning_length_mm, e.bottom_z_scanning_length_mm) as low_mm,
       greatest(e.top_z_scanning_length_mm, e.bottom_z_scanning_length_mm) as high_mm,
       e.top_z_scanning_length_mm is not null and e.bottom_z_scanning_length_mm is not null
           as has_range,
       s.patient_age_years,
       case when lower(coalesce(e.acquisition_protocol, '')) like '%perfusion%' then 'brain_perfusion'
            when regexp_matches(lower(coalesce(e.acquisition_protocol, '')),
                                '(cardiac|coronary|ccta|heart)') then 'cardiac'
            when x.region = 'head' then 'head'
            when (x.region is null or x.region = 'neck') and e.ctdi_phantom = 'head_16cm' then 'head'
            else 'torso' end as protocol_family,
       v.notification_mgy as device_notification_mgy, v.alert_mgy as device_alert_mgy
from irradiation_event as e
join study_dose as s using (study_key, device_key)
left join exam_stratum_basis as x on x.exam_type = s.exam_type
left join (
    select event_uid,
           max(dose_check_notification_ctdivol_mgy)
               filter (where dose_check_notification_ctdivol_mgy > 0) as notification_mgy,
           max(dose_check_alert_ctdivol_mgy) filter (where dose_check_alert_ctdivol_mgy > 0) as alert_mgy
    from raw_ct_event
    where dose_check_notification_ctdivol_mgy > 0 or dose_check_alert_ctdivol_mgy > 0
    group by event_uid
) as v on v.event_uid = e.event_uid
where s.study_date >= $date_from and s.study_date < $date_to
  and (e.event_type in ('spiral', 'sequenced', 'stationary') or e.event_type is null)
  and e.ctdivol_mgy is not null
