-- grain: one row per finding of the period just audited (audit_finding); replaces that period's rows
delete from audit_finding where date_from = $date_from::date and date_to = $date_last::date;
insert into audit_finding by name
with findings as (
    select item_id, 'dose_alerts' as source_table, action, rule, study_key as subject, site,
           exam_type, quantity, value, threshold, unit
    from dose_alerts
    union all by name
    -- a median from fewer exams than the modality's minimum sample is a statistical finding
    select item_id, 'audit_medians' as source_table,
           case when is_sample_adequate then 'protocol_review' else 'statistical_review' end as action,
           case when is_above_reference then 'median_above_reference'
                else 'median_well_below_reference' end as rule,
           device_key as subject, site, exam_type, quantity, median as value,
           reference_value as threshold, unit
    from audit_medians
    where is_above_reference or is_well_below_reference
    union all by name
    select item_id, 'drift_flags' as source_table, 'statistical_review' as action,
           'median_drift' as rule, device_key as subject, site, exam_type, quantity,
           median_after as value, median_before as threshold, unit
    from drift_flags
)
select $period as period, $date_from::date as date_from, $date_last::date as date_to,
       $period_length as period_length, f.*, $recorded_at::timestamp as recorded_at
from findings as f
qualify row_number() over (partition by item_id, rule order by value desc nulls last) = 1;
insert into audit_period (period, date_from, date_to, period_length, n_findings, audited_at)
select $period, $date_from::date, $date_last::date, $period_length,
       (select count(*) from audit_finding where date_from = $date_from::date and date_to = $date_last::date),
       $recorded_at::timestamp;
