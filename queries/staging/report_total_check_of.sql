-- grain: one row per report and checked quantity: the report's own events against its stated totals
-- (a report whose events carry no usable value sums to 0 and so disagrees with a stated total).
-- A table macro over the three relations it reads, given by name (columns as raw_accumulated,
-- raw_projection_event, raw_ct_event): the view report_total_check applies it to the raw tables;
-- the load's per-batch check (queries/load/insert_total_mismatch_issues.sql) to the batch's rows
-- only, so a batch never scans the whole warehouse. The one definition of the check.
create or replace macro report_total_check_of(accumulated, projection_event, ct_event) as table
with
acc as (
    select sop_instance_uid,
           sum(dap_total_gy_cm2) as dap_total,
           sum(dose_rp_total_mgy) as dose_rp_total,
           sum(dlp_total_mgy_cm) as dlp_total
    from query_table(accumulated)
    where plane <> 'all'
    group by sop_instance_uid
),
proj as (
    select sop_instance_uid, coalesce(sum(dap_gy_cm2), 0) as dap_sum,
           coalesce(sum(dose_rp_mgy), 0) as dose_rp_sum,
           count(*) as n, count(dap_gy_cm2) as n_dap, count(dose_rp_mgy) as n_rp
    from query_table(projection_event) where source_kind = 'rdsr'
    group by sop_instance_uid
),
ct as (
    select sop_instance_uid, coalesce(sum(dlp_mgy_cm), 0) as dlp_sum
    from query_table(ct_event) where source_kind = 'rdsr'
    group by sop_instance_uid
),
checks as (
    select acc.sop_instance_uid, 'dap_total_gy_cm2' as quantity, 'DCM:113722' as concept_code,
           'Gy.cm2' as unit, proj.dap_sum as events_sum, acc.dap_total as reported_total
    from acc join proj using (sop_instance_uid)
    union all
    select acc.sop_instance_uid, 'dose_rp_total_mgy', 'DCM:113725', 'mGy', proj.dose_rp_sum, acc.dose_rp_total
    from acc join proj using (sop_instance_uid)
    union all
    select acc.sop_instance_uid, 'dlp_total_mgy_cm', 'DCM:113813', 'mGy.cm', ct.dlp_sum, acc.dlp_total
    from acc join ct using (sop_instance_uid)
)
select *,
       abs(events_sum - reported_total) / nullif(greatest(abs(reported_total), abs(events_sum)), 0)
           as relative_difference
from checks
where events_sum is not null and reported_total is not null
