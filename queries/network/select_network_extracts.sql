-- grain: one row per extract merged into this warehouse
select extract_id, site, date_from, date_to, key_scope, key_fingerprint
from network_extract
order by site, date_from, date_to
