-- refresh: a temporary view named after the raw table {table}, holding only the rows of the
-- studies in refresh_scope; it hides the table for this connection (DuckDB looks names up in the
-- temp catalog first), so the calc_* views compute the scope's studies only
create or replace temp view {table} as
select * from {catalog}.main.{table}
where study_key in (select study_key from refresh_scope)
