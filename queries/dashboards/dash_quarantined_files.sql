-- grain: one row per input file that was not loaded (quarantined, not a dose object,
-- duplicate); content hash only: paths can hold identifying folder names and are not shown
select
    status,
    coalesce(reason, '') as reason,
    sha256,
    size_bytes,
    run_id
from source_object
where status <> 'loaded'
order by status, reason, sha256
