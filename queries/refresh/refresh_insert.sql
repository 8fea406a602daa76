-- refresh: add the recomputed rows of {calc} (the scope's studies, through the shadow views)
insert into {table} by name select * from {calc}
