-- grain: one row per pseudonymous patient whose CT effective-dose estimates over the 12 months
-- up to the period end reach the threshold (reported on the patient's latest study in the period)
insert into dose_alerts by name
with
rules as (select * from alert_rule_in_force where family = 'cumulative_effective_dose'),
window_studies as (
    select * from study_estimate
    where study_date >= $window_from and study_date < $date_to and effective_dose_msv is not null
      and patient_key is not null
),
per_patient as (
    select patient_key, sum(effective_dose_msv) as value, count(*) as n_studies,
           string_agg(distinct effective_dose_basis, ', ') as basis,
           arg_max(study_key, study_date) as study_key, arg_max(device_key, study_date) as device_key,
           arg_max(exam_type, study_date) as exam_type, max(study_date) as study_date
    from window_studies group by patient_key
)
select p.study_key, p.patient_key, p.device_key, d.site, p.exam_type, p.study_date, r.rule,
       r.family, r.action, r.verified as threshold_verified,
       'effective_dose' as quantity, p.value, r.threshold, r.unit,
       r.source || ' (' || p.n_studies || ' CT studies in 12 months)' as source,
       'sum of CT effective-dose estimates E = k x DLP (' || p.basis
           || ') over the 12 months up to the period end' as method
from per_patient as p
cross join rules as r
left join device as d using (device_key)
where p.value >= r.threshold and p.study_date >= $date_from
