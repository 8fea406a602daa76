-- grain: one line per row of a site table (the registered frame csv_rows), after its header:
-- the select list takes its columns through the macros of dash_csv_macros.sql; the path is the
-- file (quotes doubled). Quoting as csv.writer's: a field with a comma, a quote or a line feed
-- (comment '' keeps DuckDB from quoting '#'; a carriage return, which DuckDB quotes and
-- csv.writer does not, is left to site.csv_text). Rows in the frame's order (insertion order is
-- preserved).
copy (select {columns} from csv_rows) to '{path}'
    (format csv, header true, delimiter ',', quote '"', escape '"', new_line '\n', nullstr '',
     comment '')
