-- load: a flow run starts (state RUNNING); rerunning the same run id keeps the first row
insert or ignore into raw_pipeline_run by name select * from incoming_pipeline_run
