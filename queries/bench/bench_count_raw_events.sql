-- grain: one value: raw event rows (CT and projection) in the warehouse (benchmark scale)
select (select count(*) from raw_ct_event) + (select count(*) from raw_projection_event)
