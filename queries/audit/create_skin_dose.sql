-- grain: one row per RF/XA study x device in the period: peak skin dose estimate (public interface)
-- psd_mgy: largest cell of the summed skin-dose map (pipeline/skin_dose.py, Jones & Pasciak
-- 2011 Part I method); is_upper_bound: some events lacked geometry and were added at their
-- reference-point value; factor_sources: every factor and its source; an estimate, see
-- uncertainty_note (typically within about +-40 %; clinical follow-up by the responsible physician)
-- The model's results are kept per study in derived_skin_dose (computed when an ingest run touched
-- the study); here they are joined with study_dose for the period's site and exam type.
-- Not sorted: the factor and uncertainty texts make each row about 2 KB, and sorting them ran out
-- of a 500 MB bound at 10M events (bench/audit.py's warehouse, issue 14; measured, no other
-- source); the audit tables' row order is not part of their interface (read them with ORDER BY).
create or replace table skin_dose as
select
    s.study_key, s.patient_key, s.device_key, s.site, s.modality, s.exam_type, s.study_date,
    k.psd_mgy, k.method, k.n_events, k.n_events_with_geometry, k.ka_r_total_mgy, k.psd_to_ka_r,
    k.is_upper_bound, k.upper_bound_part_mgy, k.phantom, k.factor_sources, k.uncertainty_note
from study_dose as s
join derived_skin_dose as k using (study_key, device_key)
where s.modality in ('RF', 'XA')
  and s.study_date >= $date_from and s.study_date < $date_to

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   patient_key: pseudonymous patient key: keyed HMAC-SHA256 of Patient ID and its issuer; links a
--     patient's studies within one key epoch
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   modality: irradiating modality: CT, DX, CR, RF, XA or MG
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   study_date: Study Date (0008,0020)
--   psd_mgy: peak skin dose estimate: largest cell of the summed skin-dose map (Jones & Pasciak 2011
--     method); uncertain, typically within about +-40 %
--   method: how the estimate was made
--   n_events: irradiation events of the study
--   n_events_with_geometry: events with beam geometry (angles, distances, table position)
--   ka_r_total_mgy: total reference-point air kerma of the study
--   psd_to_ka_r: psd_mgy / ka_r_total_mgy
--   is_upper_bound: some events lacked geometry and were added at their reference-point value
--   upper_bound_part_mgy: the part of psd_mgy from events without geometry
--   phantom: the phantom the skin was modelled on (size from height and weight, else a reference
--     adult)
--   factor_sources: every factor used and its source
--   uncertainty_note: the uncertainty in words; clinical follow-up is decided by the responsible
--     physician
