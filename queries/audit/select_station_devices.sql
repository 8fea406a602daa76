-- grain: one row per upper-cased Station Name that names exactly one device
select upper(trim(station_name)) as station, min(device_key) as device_key
from device
where nullif(trim(station_name), '') is not null
group by all
having count(distinct device_key) = 1
