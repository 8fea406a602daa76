-- grain (computation behind audit_observation, kept as the table derived_audit_observation): one
-- row per audited value: a study's total (CT, fluoroscopy, interventional) or one radiograph /
-- mammographic view (radiography, mammography), with its standard exam type; without the site,
-- which the view audit_observation joins from the site map at read time
create or replace view calc_audit_observation as
with
study as (
    -- study_dose without its site: the kept totals and the study's exam match
    select t.*, x.exam_type
    from derived_study_total as t
    left join derived_exam_match as x
      on x.unit_kind = 'study' and x.study_key = t.study_key and x.device_key = t.device_key
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
        from study as s
        where s.exam_type is not null
    ) as s
),
event_exam as (
    select e.*, coalesce(m.exam_type, case when s.event_count = 1 or s.modality = 'MG'
                                           then s.exam_type end) as event_exam_type,
           s.patient_key, s.study_date, s.patient_age_years, s.patient_weight_kg
    from derived_irradiation_event as e
    join study as s using (study_key, device_key)
    left join derived_exam_match as m
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
select study_key, patient_key, device_key, modality, exam_type, quantity, unit, value,
       study_date, strftime(study_date, '%Y-%m') as period, patient_age_years, patient_weight_kg,
       case when quantity = 'ctdivol' then ctdi_phantom end as phantom, event_uid,
       null::double as compressed_breast_thickness_mm
from study_values where value is not null
union all
select study_key, patient_key, device_key, modality, event_exam_type, quantity, unit, value,
       study_date, strftime(study_date, '%Y-%m'), patient_age_years, patient_weight_kg,
       null, event_uid, compressed_breast_thickness_mm
from event_values where value is not null and event_exam_type is not null
