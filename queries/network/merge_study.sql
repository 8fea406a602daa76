-- merge: drop the studies of replaced extracts and those the incoming extract carries again
-- (the newest extract wins), then add the incoming studies
delete from raw_study
where first_run_id in (select extract_id from replaced_extract)
   or study_key in (select study_key from incoming_study);
insert or ignore into raw_study by name select * from incoming_study
