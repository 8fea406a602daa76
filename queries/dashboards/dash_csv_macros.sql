-- grain: none; the cell formats of a site CSV written by DuckDB (dash_copy_csv.sql), on the
-- in-memory connection dashboards.site opens for the CSVs: the characters of site.csv_text
-- (pandas' to_csv with float_format "%.12g" and csv.writer's quoting). A float to 12 significant
-- figures, NaN and NULL empty; a boolean as Python writes it; an empty text as an empty field
-- (DuckDB quotes "" to tell it from NULL; csv.writer writes both empty).
create or replace temp macro dash_csv_float(x) as
    case when isnan(x) then null else printf('%.12g', x) end;
create or replace temp macro dash_csv_bool(x) as
    case when x then 'True' when not x then 'False' end;
create or replace temp macro dash_csv_text(x) as nullif(x, '');
