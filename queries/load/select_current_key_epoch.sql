-- grain: at most one row: the newest key epoch (epoch, key_fingerprint, started_at)
select epoch, key_fingerprint, started_at
from raw_key_epoch
order by epoch desc
limit 1
