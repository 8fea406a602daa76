-- merge: drop the rows of replaced extracts (same site and period) and the reports the incoming
-- extract carries again (the newest extract wins), then add the incoming rows (read_extract refuses
-- an extract that repeats a key; raw_accumulated has no primary key: queries/schema/raw_accumulated.sql)
delete from raw_accumulated
where run_id in (select extract_id from replaced_extract)
   or sop_instance_uid in (select sop_instance_uid from incoming_dose_object);
insert into raw_accumulated by name select * from incoming_accumulated
