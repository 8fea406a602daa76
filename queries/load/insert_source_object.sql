-- load: append the batch's rows; rows whose key is already present are kept as they were
insert or ignore into raw_source_object by name select * from incoming_source_object
