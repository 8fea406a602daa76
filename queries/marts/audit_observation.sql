-- grain: one row per audited value: a study's total (CT, fluoroscopy, interventional) or one
-- radiograph / mammographic view (radiography, mammography), with its standard exam type
create or replace view audit_observation as
with
studies as (
    select * from study_dose where exam_type is not null
),
study_values as (
    -- one row per audited quantity of the modality: an unnest of a list of structs (a lateral
    -- VALUES join was decorrelated into a grouping and a join on every value column)
    select s.*, q.quantity, q.unit, q.value, null::varchar as event_uid
    from (
        select s.*,
               unnest(case when s.modality = 'CT' then
                          [{'quantity': 'dlp', 'unit': 'mGy.cm', 'value': s.dlp_total_mgy_cm},
                           {'quantity': 'ctdivol', 'unit': 'mGy', 'value': s.ctdivol_mgy}]
                      when s.modality in ('RF', 'XA') then
                          [{'quantity': 'dap', 'unit': 'Gy.cm2', 'value': s.dap_total_gy_cm2},
                           {'quantity': 'dose_rp', 'unit': 'mGy', 'value': s.dose_rp_total_mgy},
                           {'quantity': 'fluoro_time', 'unit': 's', 'value': s.fluoro_time_total_s}]
                      end) as q
        from studies as s
    ) as s
),
event_exam as (
    select e.*, coalesce(m.exam_type, case when s.event_count = 1 or s.modality = 'MG'
                                           then s.exam_type end) as event_exam_type,
           s.patient_key, s.site, s.study_date, s.patient_age_years, s.patient_weight_kg
    from irradiation_event as e
    join study_dose as s using (study_key, device_key)
    left join stg_exam_match as m
      on m.unit_kind = 'event' and m.event_uid = e.event_uid and m.study_key = e.study_key
    where s.modality in ('DX', 'CR', 'MG')
),
event_values as (
    select e.*, q.quantity, q.unit, q.value
    from (
        select e.*,
               unnest(case when e.modality in ('DX', 'CR') then
                          [{'quantity': 'dap', 'unit': 'Gy.cm2', 'value': e.dap_gy_cm2},
                           {'quantity': 'dose_rp', 'unit': 'mGy', 'value': e.dose_rp_mgy},
                           {'quantity': case when e.entrance_dose_derivation = 'ESAK'
                                             then 'ka_e' else 'entrance_dose' end,
                            'unit': 'mGy', 'value': e.entrance_dose_mgy}]
                      when e.modality = 'MG' then
                          [{'quantity': 'agd', 'unit': 'mGy', 'value': e.agd_mgy}]
                      end) as q
        from event_exam as e
    ) as e
)
select study_key, patient_key, device_key, site, modality, exam_type, quantity, unit, value,
       study_date, strftime(study_date, '%Y-%m') as period, patient_age_years, patient_weight_kg,
       case when quantity = 'ctdivol' then ctdi_phantom end as phantom, event_uid,
       null::double as compressed_breast_thickness_mm
from study_values where value is not null
union all
select study_key, patient_key, device_key, site, modality, event_exam_type, quantity, unit, value,
       study_date, strftime(study_date, '%Y-%m'), patient_age_years, patient_weight_kg,
       null, event_uid, compressed_breast_thickness_mm
from event_values where value is not null and event_exam_type is not null

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   patient_key: pseudonymous patient key: keyed HMAC-SHA256 of Patient ID and its issuer; links a
--     patient's studies within one key epoch
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   modality: irradiating modality: CT, DX, CR, RF, XA or MG
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   quantity: audited quantity: dlp, ctdivol (CT study); dap, dose_rp, fluoro_time (RF/XA study);
--     dap, dose_rp, entrance_dose, ka_e (DX/CR view); agd (MG view)
--   unit: unit of value: mGy, mGy.cm, Gy.cm2 or s
--   value: the audited value [unit column]
--   study_date: Study Date (0008,0020)
--   period: calendar month of the study (YYYY-MM)
--   patient_age_years: age at the study
--   patient_weight_kg: patient weight
--   phantom: CTDIvol phantom (ctdivol rows only)
--   event_uid: Irradiation Event UID of a radiograph or mammographic view; NULL for a study total
--   compressed_breast_thickness_mm: compressed breast thickness of a mammographic view
