-- grain: one row per input file of the audit period (dash_period_file) that was not loaded
-- (quarantined, not a dose object, duplicate); content hash only: paths can hold identifying
-- folder names and are not shown
select
    status,
    coalesce(reason, '') as reason,
    sha256,
    size_bytes,
    run_id
from dash_period_file
where status <> 'loaded'
order by status, reason, sha256
