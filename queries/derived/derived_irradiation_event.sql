-- grain: one row per unique irradiation event: calc_irradiation_event kept as a table, so no reader
-- recomputes the deduplication across reports. Refreshed by pipeline/warehouse/derived.py for the
-- studies each ingest run or network merge touched (whole, when its state does not match the raw
-- tables); read through the public view irradiation_event.
create table if not exists derived_irradiation_event as select * from calc_irradiation_event limit 0
