-- load: record a total_mismatch issue for each report of the batch whose events do not add up to
-- its reported accumulated total (relative difference > 1 %). The check reads the batch's own rows
-- (incoming_*, as inserted: one row per key), never the raw tables whole: a report's events and
-- totals come from its one file, so they arrive in the same batch (pipeline/ingest.py). One row per
-- report and quantity (the check's grain), each report new to the warehouse: raw_value_issue has no
-- primary key to ignore a repeat (queries/schema/raw_value_issue.sql)
insert into raw_value_issue by name
select
    c.sop_instance_uid || ':total_mismatch:' || c.quantity as issue_id,
    c.sop_instance_uid,
    null as event_uid,
    'total_mismatch' as kind,
    c.concept_code,
    c.quantity || ': events sum to ' || round(c.events_sum, 6) || ' ' || c.unit
        || ' but the report states ' || round(c.reported_total, 6) || ' ' || c.unit
        || ' (' || round(100 * c.relative_difference, 2) || ' % apart)' as detail,
    cast(c.reported_total as varchar) as raw_value,
    c.unit as raw_unit,
    (select max(run_id) from incoming_dose_object) as run_id
from report_total_check_of('incoming_accumulated', 'incoming_projection_event',
                           'incoming_ct_event') as c
where c.relative_difference > 0.01
  and c.sop_instance_uid in (select sop_instance_uid from incoming_dose_object)
