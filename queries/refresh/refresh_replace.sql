-- refresh: rebuild {table} whole from {calc} (its columns follow the definition)
-- (then the ORDER BY the rows are written in: pipeline/warehouse/derived.py, _WRITE_ORDER)
create or replace table {table} as select * from {calc}{order}
