-- refresh: the recomputed rows of {calc} (the scope's studies, through the shadow tables), kept
-- in a temporary table for the rest of the refresh: they are inserted into {table}, then stand in
-- for {table} where a later step reads the scope's rows (refresh_shadow_captured.sql), so no step
-- scans the whole of {table} for them
create or replace temp table refresh_new_{table} as select * from {calc}
