-- merge: each incoming device belongs to the extract's site (device view: raw_site_map first)
delete from raw_site_map where match_value in (select match_value from incoming_site_map);
insert into raw_site_map by name select * from incoming_site_map
