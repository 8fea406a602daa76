-- grain: one value: whether relation $relation has a column $column (optional inputs)
select count(*) > 0 from information_schema.columns
where table_name = $relation and column_name = $column
