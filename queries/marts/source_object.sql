-- grain: one row per input file (path + content); public interface
create or replace view source_object as
select path, sha256, sop_instance_uid, sop_class_uid, status, reason, run_id,
       detail, size_bytes, recorded_at
from raw_source_object
