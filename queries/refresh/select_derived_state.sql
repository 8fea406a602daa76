-- grain: one row (or none): what the derived tables were last refreshed from
select raw_state, definitions, rules from derived_state limit 1
