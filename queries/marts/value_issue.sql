-- grain: one row per value-level issue; public interface
create or replace view value_issue as
select i.issue_id, i.sop_instance_uid, o.study_key, o.device_key, i.event_uid, i.kind,
       i.concept_code, i.detail, i.raw_value, i.raw_unit, i.run_id
from raw_value_issue as i
left join raw_dose_object as o using (sop_instance_uid)

-- columns:
--   issue_id: id of the issue
--   sop_instance_uid: SOP Instance UID (0008,0018) of the DICOM object
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   event_uid: Irradiation Event UID (0008,3010) of the event (NULL for a study total)
--   kind: issue kind: missing_value, unknown_unit, implausible_value, below_resolution,
--     unparsed_dose_text ...
--   concept_code: scheme:value of the concept, e.g. DCM:113838
--   detail: what was wrong and what was done (the value itself is stored as NULL, never guessed)
--   raw_value: the value as found
--   raw_unit: the unit as found
--   run_id: ingest run that recorded the row (raw_run.run_id)
