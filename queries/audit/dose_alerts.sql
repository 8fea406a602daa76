-- grain: one row per study x rule that fired in the period (pseudonymous keys only)
create or replace table dose_alerts as
with
studies as (
    select * from study_dose where study_date >= $date_from and study_date < $date_to
),
rules as (
    select * from alert_rule_in_force
),
fluoro as (
    -- substantial radiation dose levels (follow-up triggers, not limits)
    select s.study_key, s.patient_key, s.device_key, s.site, s.exam_type, s.study_date, r.rule,
           r.quantity,
           case r.quantity when 'dose_rp' then s.dose_rp_total_mgy
                           when 'dap' then s.dap_total_gy_cm2
                           when 'fluoro_time' then s.fluoro_time_total_s end as value,
           r.threshold, r.unit, r.source
    from studies as s
    join rules as r on r.family = 'fluoro_substantial_dose' and s.modality in ('RF', 'XA')
),
ct_events as (
    -- CT dose-check notification values apply per scan (acquisition)
    select s.study_key, s.patient_key, s.device_key, s.site, s.exam_type, s.study_date, r.rule,
           r.quantity, max(e.ctdivol_mgy) as value, r.threshold, r.unit, r.source
    from irradiation_event as e
    join studies as s using (study_key, device_key)
    join rules as r
      on r.family = 'ct_dose_check_notification' and r.quantity = 'ctdivol'
     and r.phantom = e.ctdi_phantom
    where e.event_type in ('spiral', 'sequenced', 'stationary') and e.ctdivol_mgy is not null
    group by all
),
ct_alert as (
    -- CT dose-check alert value: accumulated CTDIvol of the examination
    select s.study_key, s.patient_key, s.device_key, s.site, s.exam_type, s.study_date, r.rule,
           r.quantity, sum(e.ctdivol_mgy) as value, r.threshold, r.unit, r.source
    from irradiation_event as e
    join studies as s using (study_key, device_key)
    join rules as r on r.family = 'ct_dose_check_alert' and r.quantity = 'ctdivol'
    where e.event_type in ('spiral', 'sequenced', 'stationary') and e.ctdivol_mgy is not null
    group by all
),
obs as (
    select o.*, ln(o.value) as log_value
    from audit_observation as o
    where o.study_date >= $date_from and o.study_date < $date_to and o.value > 0
),
centre as (
    select exam_type, device_key, quantity, median(log_value) as med, count(*) as n
    from obs group by all
),
spread as (
    select o.exam_type, o.device_key, o.quantity, c.med, c.n,
           median(abs(o.log_value - c.med)) as mad
    from obs as o join centre as c using (exam_type, device_key, quantity)
    group by all
),
outliers as (
    -- modified z-score on log dose within exam type x device (Iglewicz & Hoaglin 1993):
    -- M = 0.6745 (x - median) / MAD; |M| > threshold is an outlier
    select o.study_key, o.patient_key, o.device_key, o.site, o.exam_type, o.study_date,
           case when o.log_value > s.med then 'robust_outlier_high' else 'robust_outlier_low' end as rule,
           o.quantity, o.value,
           exp(s.med + sign(o.log_value - s.med) * r.threshold * s.mad / 0.6745) as threshold,
           o.unit, r.source
    from obs as o
    join spread as s using (exam_type, device_key, quantity)
    join rules as r on r.family = 'robust_outlier'
    where s.n >= $outlier_min_n and s.mad > 0
      and abs(0.6745 * (o.log_value - s.med) / s.mad) > r.threshold
)
select study_key, patient_key, device_key, site, exam_type, study_date, rule, quantity, value,
       threshold, unit, source
from (
    select * from fluoro where value >= threshold
    union all by name select * from ct_events where value > threshold
    union all by name select * from ct_alert where value > threshold
    union all by name select * from outliers
)
order by study_date, rule, study_key
