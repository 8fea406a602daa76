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
