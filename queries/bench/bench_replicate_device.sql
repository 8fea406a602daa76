-- grain: one row per irradiating device and room copy r (benchmark: a network of many rooms)
insert into raw_device by name
select d.* replace (d.device_key || '~' || r.r as device_key)
from raw_device as d, range(1, $rooms) as r (r)
where d.device_key not like '%~%'
