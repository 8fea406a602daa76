-- grain: one row per study and irradiating device; public interface
-- Totals come from the deduplicated events (irradiation_event). Where a report's events lack a
-- value (e.g. a NULL kept for a missing unit) the latest report's stated accumulated total is
-- used instead.
-- dlp_total_mgy_cm and dlp_method: 'reported' (the report's or dose screen's stated total,
-- used when events lack a DLP and the total is larger), 'event_sum' (sum of the events' DLP),
-- 'estimated_from_images' (a CT study known only from image headers: the sum over its
-- non-localizer series, reconstructions counted once, of mean CTDIvol x covered length; see
-- stg_ct_image_series: a lower bound); NULL when no DLP is known or for other modalities.
-- ctdivol_mgy: scanning-length-weighted mean of Mean CTDIvol over spiral and sequenced
-- acquisitions (localizers, constant-angle and stationary acquisitions excluded):
-- sum(CTDIvol_i * L_i) / sum(L_i). Without scanning lengths (dose screens) L_i = DLP_i /
-- CTDIvol_i, which gives sum(DLP_i) / sum(DLP_i / CTDIvol_i) over the non-localizer events; a
-- study known only from image headers takes the highest CTDIvol of each non-localizer series,
-- then the mean over its series (reconstructions counted once). ctdi_phantom is the phantom of
-- those acquisitions ('mixed' if they differ).
-- entrance_dose_total_mgy: sum of the events' image-header Entrance Dose (mGy); a surface dose,
-- kept apart from dose_rp_total_mgy, the reference-point air kerma (Ka,r) of dose reports.
-- exam_type: the standard exam type the rules map the study to (NULL when unmapped).
-- The totals are kept as the table derived_study_total (queries/staging/calc_study_total.sql
-- computes them), refreshed for the studies each ingest run or network merge touched; the site
-- and the exam type are joined here, so a changed site map or exam rule applies at once.
create or replace view study_dose as
select
    t.study_key, t.patient_key, t.device_key, d.site, t.modality, t.study_date,
    t.study_description, t.patient_age_years, t.patient_sex, t.patient_weight_kg,
    t.patient_height_m, t.event_count, t.dap_total_gy_cm2, t.dose_rp_total_mgy,
    t.fluoro_time_total_s, t.dlp_total_mgy_cm, t.ctdivol_mgy, t.source_kind, t.ctdivol_max_mgy,
    t.ctdi_phantom, x.exam_type, x.matched_field as exam_matched_field,
    x.matched_text as exam_matched_text, t.agd_total_mgy, t.n_reports,
    t.entrance_dose_total_mgy, t.dlp_method
from derived_study_total as t
left join device as d using (device_key)
left join stg_exam_match as x
  on x.unit_kind = 'study' and x.study_key = t.study_key and x.device_key = t.device_key

-- columns:
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   patient_key: pseudonymous patient key: keyed HMAC-SHA256 of Patient ID and its issuer; links a
--     patient's studies within one key epoch
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   modality: irradiating modality: CT, DX, CR, RF, XA or MG
--   study_date: Study Date (0008,0020)
--   study_description: Study Description (0008,1030) as sent
--   patient_age_years: age at the study, from Patient's Age (0010,1010) or birth date and study date
--     (the birth date is not stored)
--   patient_sex: Patient's Sex (0010,0040): M, F or O
--   patient_weight_kg: Patient's Weight (0010,1030)
--   patient_height_m: Patient's Size (0010,1020)
--   event_count: irradiation events of the study on this device (deduplicated)
--   dap_total_gy_cm2: total dose-area product: sum over the events, else the report's stated
--     accumulated total
--   dose_rp_total_mgy: total Dose (RP), the reference-point air kerma Ka,r of dose reports: sum over
--     the events, else the stated total
--   fluoro_time_total_s: total fluoroscopy time: sum of the fluoroscopy events' durations, else the
--     stated total
--   dlp_total_mgy_cm: total dose-length product of a CT study; see dlp_method for its source; NULL
--     for other modalities
--   ctdivol_mgy: scanning-length-weighted mean CTDIvol of the spiral and sequenced acquisitions
--     (localizers excluded)
--   source_kind: best source of the study's events: rdsr (dose report), dose_screen or image_header
--   ctdivol_max_mgy: largest CTDIvol of one event
--   ctdi_phantom: CTDIvol phantom of the acquisitions: head_16cm, body_32cm, or mixed
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   exam_matched_field: field whose text matched the exam rule: procedure_code,
--     acquisition_protocol, study_description, series_description or body_part
--   exam_matched_text: normalised text of that field that matched
--   agd_total_mgy: sum of the average glandular dose of the study's mammographic views
--   n_reports: dose objects (reports, screens, image headers) that contributed events
--   entrance_dose_total_mgy: sum of the image headers' Entrance Dose: a surface dose, never pooled
--     with Ka,r
--   dlp_method: reported (the stated total), event_sum (sum of the events) or estimated_from_images
--     (lower bound from image headers); NULL outside CT
