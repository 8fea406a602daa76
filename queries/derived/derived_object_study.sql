-- grain: one row per SOP instance (dose object) x study x device of the deduplicated irradiation
-- events, with the study's date: calc_object_study kept as a table, so a site build finds each
-- file's studies without grouping every event. Refreshed after the events and study totals, for
-- the studies each ingest run or network merge touched (pipeline/warehouse/derived.py).
create table if not exists derived_object_study as select * from calc_object_study limit 0
