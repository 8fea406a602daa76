-- refresh: a temporary table named after the raw table {table}, holding only the rows of the
-- studies in refresh_scope; it hides the table for this connection (DuckDB looks names up in the
-- temp catalog first), so the calc_* views compute the scope's studies only. A table, not a view:
-- the calc_* views read each raw table several times, and a view scanned the whole raw table
-- each time (one refresh of 256 studies in a 1000-study warehouse read 13x the rows of
-- raw_dose_object, 6x raw_projection_event, 7x raw_ct_event: DuckDB's JSON profiler, rows
-- scanned); the copy scans it once (with the raw-state digest and the scope's expansion:
-- 2x, 4x, 4x)
-- The scope's rows are found by their row ids, looked up before the refresh's transaction
-- (refresh_scope_rows.sql: that scan reads only the study_key column of the whole table); the copy
-- then reads the other columns only of the row groups holding those rows (the ingest's new studies
-- are at the table's end). Selecting them by study_key directly read every column of the whole
-- table, and DuckDB kept those blocks in memory for the rest of the refresh: about 74 MiB at 100k
-- studies for the five raw tables, against 12 MiB for their study_key columns
-- (bench/ingest_scale.py, measured, no other source). The same rows either way.
create or replace temp table {table} as
select * from {catalog}.main.{table}
where rowid in (select row_id from temp.main.refresh_rows_{table})
