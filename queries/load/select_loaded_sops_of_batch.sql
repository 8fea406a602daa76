-- load: the SOP Instance UIDs of the batch ($sops, a list) already loaded. list_contains over a
-- list parameter lets DuckDB answer from the primary key's index (an index scan, up to its
-- index_scan_max_count of 2048 values; beyond, a whole scan with the same answer)
select d.sop_instance_uid
from raw_dose_object as d
where list_contains($sops::varchar[], d.sop_instance_uid)
