-- load: drop one reference-level set before it is (re)written
delete from reference_level where set_id = $set_id
