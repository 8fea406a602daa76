-- grain: one row per CT study x device: SSDE and the population-average effective-dose estimate
create or replace table study_estimate as select * from incoming_study_estimate

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
