-- load: append the batch's rows; rows whose key is already present are kept as they were
insert or ignore into raw_dose_object by name select * from incoming_dose_object
