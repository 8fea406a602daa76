-- grain: one row per device with a dose object in the extract (extract_dose_object registered)
select *
from raw_device
where device_key in (select device_key from extract_dose_object)
order by device_key
