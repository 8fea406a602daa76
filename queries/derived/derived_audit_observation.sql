-- grain: one row per audited value: calc_audit_observation kept as a table, so an audit reads
-- its observations instead of unnesting every study's totals and views again. Refreshed after the
-- exam matches, for the studies each ingest run or network merge touched, and whole when the
-- exam rules change; read through the public view audit_observation, which joins the site.
create table if not exists derived_audit_observation as select * from calc_audit_observation limit 0
