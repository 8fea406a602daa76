-- load: append the batch's rows; rows whose key is already present are kept as they were
insert or ignore into raw_ct_event by name select * from incoming_ct_event
