-- grain: one row per table or view in the warehouse (to check the audit has run)
select table_name
from information_schema.tables
order by table_name
