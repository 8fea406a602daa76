-- grain: one row per CT study x device up to the period end: SSDE and the population-average effective-dose estimate
-- E = k x DLP with k by the exam type's body region and the patient's age band (an unknown age
-- takes the adult coefficient; table effective_dose_factor, made by pipeline.audit from
-- pipeline.reference.effective_dose_msv for each exam type and age present). SSDE: reported by
-- the device (length-weighted over its spiral and sequenced acquisitions), else the AAPM Report
-- 204 fit f = a exp(-b Dw) at the water-equivalent diameter (AAPM Report 220) within the fit's
-- domain (table ssde_fit, from pipeline.reference). An estimate that cannot be made is NULL.
create or replace table study_estimate as
with
ct_events as (
    -- the acquisitions' size and SSDE per study, grouped on the two keys alone
    select study_key, device_key,
           avg(water_equivalent_diameter_mm) as water_equivalent_diameter_mm,
           sum(ssde_mgy * scanning_length_mm)
             / nullif(sum(scanning_length_mm) filter (where ssde_mgy is not null), 0)
               as reported_ssde_mgy
    from irradiation_event
    where event_type in ('spiral', 'sequenced')   -- CT acquisitions only
    group by study_key, device_key
),
ct as (
    select s.study_key, s.patient_key, s.device_key, s.exam_type, s.study_date,
           s.patient_age_years, s.dlp_total_mgy_cm, s.ctdivol_mgy, s.ctdi_phantom,
           e.water_equivalent_diameter_mm, e.reported_ssde_mgy
    from study_dose as s
    left join ct_events as e using (study_key, device_key)
    where s.modality = 'CT' and s.study_date < $date_to
),
estimated as (
    select c.*,
           case when isfinite(c.dlp_total_mgy_cm) and c.dlp_total_mgy_cm >= 0
                then k.k_msv_per_mgy_cm * c.dlp_total_mgy_cm end as effective_dose_msv,
           k.basis, k.source,
           c.water_equivalent_diameter_mm / 10.0::double as dw_cm,
           f.a, f.b_per_cm, f.d_min_cm, f.d_max_cm, f.usable
    from ct as c
    left join effective_dose_factor as k
      on k.exam_type = c.exam_type
     and k.patient_age_years is not distinct from c.patient_age_years
    left join ssde_fit as f
      on f.phantom = c.ctdi_phantom and c.reported_ssde_mgy is null
     and c.water_equivalent_diameter_mm is not null and c.ctdivol_mgy is not null
),
sized as (
    select *,
           case when usable and dw_cm between d_min_cm and d_max_cm
                then a * exp(-b_per_cm * dw_cm) end as ssde_factor
    from estimated
)
select study_key, patient_key, device_key, exam_type, study_date, dlp_total_mgy_cm,
       effective_dose_msv,
       case when effective_dose_msv is not null and dlp_total_mgy_cm <> 0
            then effective_dose_msv / dlp_total_mgy_cm end as k_msv_per_mgy_cm,
       case when effective_dose_msv is not null then basis end as effective_dose_basis,
       case when effective_dose_msv is not null
            then source || case when patient_age_years is null
                                then ' (age unknown: adult coefficient)' else '' end
       end as effective_dose_source,
       case when reported_ssde_mgy is not null then reported_ssde_mgy
            else ssde_factor * ctdivol_mgy end as ssde_mgy,
       case when reported_ssde_mgy is not null then 'reported by the device (TID 10013)'
            when ssde_factor is not null
            then 'AAPM Report 204 fit at Dw ' || format('{:.0f}', water_equivalent_diameter_mm)
                 || ' mm (AAPM Report 220), f = ' || format('{:.3f}', ssde_factor)
                 || '; fit corroborated by secondary sources'
       end as ssde_method
from sized

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   patient_key: pseudonymous patient key: keyed HMAC-SHA256 of Patient ID and its issuer; links a
--     patient's studies within one key epoch
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   study_date: Study Date (0008,0020)
--   dlp_total_mgy_cm: total DLP of the CT study
--   effective_dose_msv: population-average effective-dose estimate E = k x DLP for a reference
--     patient: not an individual's dose or risk
--   k_msv_per_mgy_cm: conversion coefficient k by body region and age [mSv/(mGy·cm)]
--   effective_dose_basis: ICRP 103 tissue weighting (default) or ICRP 60
--   effective_dose_source: publication of k
--   ssde_mgy: size-specific dose estimate: reported by the device, else AAPM Report 204 at the
--     water-equivalent diameter
--   ssde_method: how the SSDE was obtained (NULL: none)
