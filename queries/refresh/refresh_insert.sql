-- refresh: add the recomputed rows of {calc} (the scope's studies, through the shadow views)
-- (then the ORDER BY the rows are written in: pipeline/warehouse/derived.py, _WRITE_ORDER)
insert into {table} by name select * from {calc}{order}
