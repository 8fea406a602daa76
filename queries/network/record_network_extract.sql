-- merge: forget replaced extracts, record the incoming one (incoming_network_extract, one row)
delete from network_extract where extract_id in (select extract_id from replaced_extract);
insert into network_extract by name select * from incoming_network_extract
