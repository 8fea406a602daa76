-- grain: one row per input file (path + content); public interface
create or replace view source_object as
select path, sha256, sop_instance_uid, sop_class_uid, status, reason, run_id,
       detail, size_bytes, recorded_at
from raw_source_object

-- columns:
--   path: input path as given to ingest (a file, or archive!member for a member of a .zip or .tar)
--   sha256: SHA-256 of the file's bytes (hex)
--   sop_instance_uid: SOP Instance UID (0008,0018), when the file could be read that far
--   sop_class_uid: SOP Class UID (0008,0016), when the file could be read that far
--   status: loaded, duplicate, not_dose or quarantined
--   reason: short reason code (e.g. truncated, not_dicom, malformed_report); NULL for a plain load
--   run_id: ingest run that recorded the row (raw_run.run_id)
--   detail: the full message of the reason
--   size_bytes: file size
--   recorded_at: when the ingest recorded the file (local time of the ingest machine)
