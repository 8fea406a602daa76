-- refresh: add the scope's recomputed rows of {table} (refresh_capture.sql)
-- (then the ORDER BY the rows are written in: pipeline/warehouse/derived.py, _WRITE_ORDER)
insert into {table} by name select * from temp.main.refresh_new_{table}{order}
