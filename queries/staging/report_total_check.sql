-- grain: one row per report and checked quantity: the report's own events against its stated totals
-- (a report whose events carry no usable value sums to 0 and so disagrees with a stated total),
-- over every report in the warehouse: the table macro report_total_check_of over the raw tables
create or replace view report_total_check as
select * from report_total_check_of('raw_accumulated', 'raw_projection_event', 'raw_ct_event')
