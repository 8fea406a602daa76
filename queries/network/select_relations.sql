-- grain: one row per table or view of the warehouse
select table_name from information_schema.tables order by table_name
