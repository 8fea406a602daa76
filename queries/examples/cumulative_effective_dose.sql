-- grain: one row per pseudonymous patient with at least one CT effective-dose estimate
-- question: cumulative CT effective-dose estimates per pseudonymous patient
-- columns: patient_key, n_ct_studies, first_study_date, last_study_date,
--   cumulative_effective_dose_msv, largest_study_effective_dose_msv, effective_dose_basis
-- parameters: none
-- note: effective dose E = k x DLP (study_estimate, written by the last `kerma audit` for every
--   CT study up to its period end) is a population quantity for a reference patient: it is
--   not this patient's dose or risk, and a sum of estimates is a screening number for
--   follow-up by a qualified medical physicist, nothing more. Pseudonyms link a patient only
--   within one key epoch (key_epoch). Only the key holder can re-identify a patient.
-- run: kerma sql --warehouse kerma-demo/kerma.duckdb --file queries/examples/cumulative_effective_dose.sql
select
    e.patient_key,
    count(*) as n_ct_studies,
    min(e.study_date) as first_study_date,
    max(e.study_date) as last_study_date,
    sum(e.effective_dose_msv) as cumulative_effective_dose_msv,
    max(e.effective_dose_msv) as largest_study_effective_dose_msv,
    string_agg(distinct e.effective_dose_basis, '; ') as effective_dose_basis
from study_estimate as e
where e.patient_key is not null and e.effective_dose_msv is not null
group by e.patient_key
order by cumulative_effective_dose_msv desc, e.patient_key
