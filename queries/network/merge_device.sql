-- merge: drop the devices of replaced extracts and those the incoming extract carries again
-- (the newest extract describes the device), then add the incoming devices
delete from raw_device
where first_run_id in (select extract_id from replaced_extract)
   or device_key in (select device_key from incoming_device);
insert or ignore into raw_device by name select * from incoming_device
