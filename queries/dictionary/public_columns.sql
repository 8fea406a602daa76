-- grain: one row per column of each relation named in $relations (main schema), in column order
select
    c.table_name as relation,
    case t.table_type when 'VIEW' then 'view' else 'table' end as kind,
    c.column_name,
    c.data_type
from information_schema.columns as c
join information_schema.tables as t
  on t.table_catalog = c.table_catalog and t.table_schema = c.table_schema
 and t.table_name = c.table_name
where c.table_schema = 'main' and list_contains($relations, c.table_name)
order by c.table_name, c.ordinal_position
