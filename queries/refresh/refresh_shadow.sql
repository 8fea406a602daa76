-- refresh: a temporary table named after the raw table {table}, holding only the rows of the
-- studies in refresh_scope; it hides the table for this connection (DuckDB looks names up in the
-- temp catalog first), so the calc_* views compute the scope's studies only. A table, not a view:
-- the calc_* views read each raw table many times (40-odd scans of raw_dose_object for one
-- refresh, measured with DuckDB's profiler), and a view would scan the whole raw table each time;
-- the copy scans it once.
create or replace temp table {table} as
select * from {catalog}.main.{table}
where study_key in (select study_key from refresh_scope)
