-- refresh: add the scope's recomputed rows of {table} (refresh_capture.sql)
insert into {table} by name select * from temp.main.refresh_new_{table}
