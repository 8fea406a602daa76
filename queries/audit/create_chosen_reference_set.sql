-- grain: one row per reference-level set chosen for this run, in order of precedence (is_fallback: fills gaps only)
create or replace temp table chosen_reference_set as select * from incoming_chosen_reference_set
