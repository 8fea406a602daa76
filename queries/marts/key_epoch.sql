-- grain: one row per pseudonymisation-key epoch; public interface
-- is_current: the epoch new ingests must match. Pseudonyms (patient_key, study_key) of two
-- epochs come from different keys, so the same patient is not linked across them.
create or replace view key_epoch as
select
    epoch,
    key_fingerprint,
    started_at,
    first_run_id,
    epoch = max(epoch) over () as is_current
from raw_key_epoch

-- columns:
--   epoch: epoch number, 1 for the first key
--   key_fingerprint: first 16 hex characters of HMAC-SHA256(key, fixed label): names the key, never
--     reveals it
--   started_at: when the epoch started (local time of the ingest machine)
--   first_run_id: ingest run that started the epoch
--   is_current: the epoch new ingests must match
