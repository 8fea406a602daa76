-- refresh: rebuild {table} whole from {calc} (its columns follow the definition)
create or replace table {table} as select * from {calc}
