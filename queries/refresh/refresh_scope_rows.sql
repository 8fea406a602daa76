-- refresh: the row ids of the raw table {table}'s rows of the studies in refresh_scope, looked up
-- before the refresh's transaction begins. The lookup reads the whole study_key column of the
-- table; done here, the blocks it read are let go before the transaction (DuckDB keeps every
-- block it reads, and inside the transaction they added up with the warehouse: the refresh's
-- cached table blocks grew from 4 to 26 MiB between 3.6k and 71k files of a 100k-study run;
-- bench/ingest_scale.py, measured, no other source). Nothing writes between this lookup and
-- the copy that reads it (refresh_shadow.sql): the ingest is the only writer, and its
-- connection runs the refresh's statements one after another.
create or replace temp table refresh_rows_{table} as
select rowid as row_id from {catalog}.main.{table}
where study_key in (select study_key from refresh_scope)
