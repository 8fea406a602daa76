-- refresh: record the raw state and definitions the derived tables now match
insert into derived_state
select $raw_state, $definitions, $refreshed_at, $n_studies, $mode
