-- load: append the batch's rows; rows whose key is already present are kept as they were
insert or ignore into raw_run by name select * from incoming_run
