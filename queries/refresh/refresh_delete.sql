-- refresh: drop the derived rows of the studies in refresh_scope before they are recomputed
delete from {table} where study_key in (select study_key from refresh_scope)
