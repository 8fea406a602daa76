-- refresh: record the raw state, definitions and exam rules the derived tables now match
insert into derived_state
select $raw_state, $definitions, $rules, $refreshed_at, $n_studies, $mode
