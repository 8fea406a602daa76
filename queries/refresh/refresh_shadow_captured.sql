-- refresh: a temporary table named after the derived table {table}, holding the scope's rows just
-- recomputed (refresh_capture.sql); it hides {table} for this connection, so the calc_* views
-- reading it compute the scope's studies only (as refresh_shadow.sql does for the raw tables)
create or replace temp table {table} as select * from temp.main.refresh_new_{table}
