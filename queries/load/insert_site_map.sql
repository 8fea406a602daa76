-- load: the device -> site assignments of kerma.toml [sites]
insert into raw_site_map by name select * from incoming_site_map
