-- load: the primary-key columns of the warehouse's tables named in $names (one row per table)
select table_name, constraint_column_names
from duckdb_constraints()
where constraint_type = 'PRIMARY KEY'
  and database_name = current_database()
  and schema_name = 'main'
  and table_name in (select unnest($names::varchar[]))
