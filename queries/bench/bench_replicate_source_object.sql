-- grain: one row per input file and copy k (benchmark scale-up)
insert into raw_source_object by name
select s.* replace (
    s.path || '~' || c.k as path,
    s.sop_instance_uid || '~' || c.k as sop_instance_uid
)
from raw_source_object as s, range(1, $copies) as c (k)
where s.path not like '%~%'
