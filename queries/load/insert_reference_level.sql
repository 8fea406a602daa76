-- load: rows of reference-level sets
insert into reference_level by name select * from incoming_reference_level
