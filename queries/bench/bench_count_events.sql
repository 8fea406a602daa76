-- grain: one value: the number of unique irradiation events in the warehouse (benchmark scale)
select count(*) from irradiation_event
