-- grain: one row per pseudonymisation-key epoch (fingerprints only), oldest first
select epoch, key_fingerprint, started_at, is_current
from key_epoch
order by epoch
