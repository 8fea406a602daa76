-- grain: one row per audited value: a study's total (CT, fluoroscopy, interventional) or one
-- radiograph / mammographic view (radiography, mammography), with its standard exam type
-- Kept as the table derived_audit_observation (queries/derived/calc_audit_observation.sql
-- computes it), refreshed for the studies each ingest run or network merge touched and whole
-- when the exam rules change; the site is joined here, so a changed site map applies at once.
create or replace view audit_observation as
select o.study_key, o.patient_key, o.device_key, d.site, o.modality, o.exam_type, o.quantity,
       o.unit, o.value, o.study_date, o.period, o.patient_age_years, o.patient_weight_kg,
       o.phantom, o.event_uid, o.compressed_breast_thickness_mm
from derived_audit_observation as o
left join device as d using (device_key)

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
