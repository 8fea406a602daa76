-- grain: one row per reference-level set chosen for this run, in order of precedence
create or replace temp table chosen_reference_set as select * from incoming_chosen
