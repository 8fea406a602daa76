-- load: append the batch's rows (one per key: the batch is cut to the first row of each key, and
-- its reports are new to the warehouse; the table has no primary key, pipeline/warehouse/load.py)
insert into raw_value_issue by name select * from incoming_value_issue
