-- grain: one row per study x rule that fired in the period (pseudonymous keys only)
-- family: the rule family; action: patient_follow_up | protocol_review | statistical_review;
-- method: how the value was computed; threshold_verified: the threshold was read in its
-- primary source (false: a default recalled from memory, on by default and labelled).
-- The rules on a study's own values run here over every study of the period at once (their
-- states are per study and spill); the outlier rule, whose medians hold every value of a group in
-- memory, is inserted after it over parts of the rooms (dose_alerts_outliers.sql). Rows are not
-- in a defined order: read with ORDER BY.
-- The CT rules run on the keys and the values alone (an acquisition's study, device, CTDIvol,
-- protocol family and the study's age: ct_acquisition, create_ct_acquisition.sql), and only the
-- rows that fire meet the studies' other columns (patient, site, exam type, date): joining every
-- acquisition to those columns and grouping it with them and the rule's texts (group by all)
-- took 7.0 CPU-s at 10M events and spilled 2.8 GB under the audit's 400 MB; this form 4.0 with
-- its own join of the acquisitions to the studies, 1.9 reading ct_acquisition; the same rows
-- (measured, no other source).
create or replace table dose_alerts as
with
rules as (
    select * from alert_rule_in_force
),
fluoro as (
    -- substantial radiation dose levels (follow-up triggers, not limits)
    select s.study_key, s.patient_key, s.device_key, s.site, s.exam_type, s.study_date, r.rule,
           r.family, r.action, r.verified as threshold_verified, r.quantity,
           case r.quantity when 'dose_rp' then s.dose_rp_total_mgy
                           when 'dap' then s.dap_total_gy_cm2
                           when 'fluoro_time' then s.fluoro_time_total_s end as value,
           r.threshold, r.unit, r.source,
           'study total of ' || r.quantity || ' (all irradiation events of the study)' as method
    from study_dose as s
    join rules as r on r.family = 'fluoro_substantial_dose'
    where s.modality in ('RF', 'XA') and s.study_date >= $date_from and s.study_date < $date_to
),
ct_acquisitions as (
    -- the period's CT acquisitions with their protocol family (create_ct_acquisition.sql)
    select *, patient_age_years is null or patient_age_years >= $adult_min_age as is_adult
    from ct_acquisition
),
ct_events as (
    -- CT dose-check notification values apply per scan sequence (acquisition), by population
    -- x body region x protocol family (AAPM 2011), not by phantom alone: the largest CTDIvol
    -- per study x device x rule (a rule has one protocol family; the age is the study's)
    select a.study_key, a.device_key, r.rule, max(a.ctdivol_mgy) as value
    from ct_acquisitions as a
    join rules as r
      on r.family = 'ct_dose_check_notification' and r.quantity = 'ctdivol'
     and r.protocol_family = a.protocol_family
     and (r.event_type is null or r.event_type = a.event_type)
     and (r.phantom is null or r.phantom = a.ctdi_phantom)
     and (r.population = 'any'
          or (a.is_adult and r.population = 'adult')
          or (not a.is_adult and r.population = 'paediatric'
              and a.patient_age_years >= coalesce(r.age_min_years, 0)
              and a.patient_age_years < coalesce(r.age_max_years, 1e9)))
    group by a.study_key, a.device_key, r.rule
),
device_check as (
    -- the scanner's own CT dose-check values (PS3.16 TID 10015, NEMA XR 25) as recorded in its
    -- report: an acquisition above the value the device was configured with
    select study_key, device_key, 'notification' as kind, device_notification_mgy as threshold,
           max(ctdivol_mgy) as value
    from ct_acquisition where device_notification_mgy is not null
    group by study_key, device_key, device_notification_mgy
    union all
    select study_key, device_key, 'alert' as kind, device_alert_mgy as threshold,
           max(ctdivol_mgy) as value
    from ct_acquisition where device_alert_mgy is not null
    group by study_key, device_key, device_alert_mgy
),
ct_fired as (
    -- the CT rows that fire, by the keys; then the study's columns, once
    select e.study_key, e.device_key, r.rule, r.family, r.action,
           r.verified as threshold_verified, r.quantity, e.value, r.threshold, r.unit, r.source,
           r.protocol_family, null::varchar as method
    from ct_events as e
    join rules as r using (rule)
    where e.value > r.threshold
    union all
    -- CT dose-check alert value: CTDIvol accumulated at a table position (ct_accumulated:
    -- maximum over z, or the labelled upper bound when positions are missing)
    select c.study_key, c.device_key, r.rule, r.family, r.action,
           r.verified as threshold_verified, r.quantity, c.accumulated_ctdivol_mgy as value,
           r.threshold, r.unit, r.source, null as protocol_family, c.method
    from ct_accumulated as c
    join rules as r on r.family = 'ct_dose_check_alert' and r.quantity = 'ctdivol'
    where c.accumulated_ctdivol_mgy > r.threshold
    union all
    select study_key, device_key, 'device_dose_check_' || kind as rule,
           'device_dose_check' as family, 'protocol_review' as action, true as threshold_verified,
           'ctdivol' as quantity, value, threshold, 'mGy' as unit,
           'the device''s own configured CTDIvol ' || kind || ' value (TID 10015) in its dose report'
               as source, null as protocol_family,
           'largest CTDIvol of one acquisition against the value the device recorded for it' as method
    from device_check
    where value > threshold
),
ct as (
    select s.study_key, s.patient_key, s.device_key, s.site, s.exam_type, s.study_date, f.rule,
           f.family, f.action, f.threshold_verified, f.quantity, f.value, f.threshold, f.unit,
           f.source,
           case when f.family = 'ct_dose_check_notification'
                then 'largest CTDIvol of one acquisition, ' || f.protocol_family || ' protocol, '
                     || case when s.patient_age_years is null then 'age unknown: adult value'
                             when s.patient_age_years >= $adult_min_age then 'adult'
                             else 'paediatric, age ' || round(s.patient_age_years, 1) || ' y' end
                else f.method end as method
    from ct_fired as f
    join study_dose as s using (study_key, device_key)
    where s.study_date >= $date_from and s.study_date < $date_to
)
select study_key, patient_key, device_key, site, exam_type, study_date, rule, family, action,
       quantity, value, threshold, unit, source, method, threshold_verified
from (
    select * from fluoro where value >= threshold
    union all by name select * from ct
)
order by study_date, rule, study_key

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   patient_key: pseudonymous patient key: keyed HMAC-SHA256 of Patient ID and its issuer; links a
--     patient's studies within one key epoch
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   study_date: Study Date (0008,0020)
--   rule: id of the rule that fired (pipeline/alert_rules.toml or kerma.toml)
--   family: rule family: fluoro_substantial_dose, ct_dose_check_notification, ct_dose_check_alert,
--     device_dose_check, robust_outlier, cumulative_effective_dose, peak_skin_dose
--   action: patient_follow_up, protocol_review or statistical_review
--   quantity: dose quantity: dlp, ctdivol, dap, dose_rp, fluoro_time, agd, ka_e, entrance_dose,
--     effective_dose or peak_skin_dose
--   value: the value that fired the rule [unit column]
--   threshold: the rule's threshold [unit column]
--   unit: unit of value (and of the medians and reference values of the row), UCUM-like text: mGy,
--     mGy.cm, Gy.cm2, s, mSv
--   source: where the threshold comes from (publication, or 'from memory')
--   method: how the value was computed
--   threshold_verified: the threshold was read in its primary source (false: a default recalled from
--     memory, labelled)
--   item_id: stable finding id: the same finding next period has the same id (notes attach to it:
--     kerma note)
