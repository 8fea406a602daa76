-- grain: one row per study x rule that fired (dose_alerts) with display labels and item_id;
-- pseudonymous keys only; patient follow-up first, then protocol review, then statistical review
select
    a.item_id,
    a.action,
    a.study_date,
    a.study_key,
    a.patient_key,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    coalesce(d.room_label, a.device_key) as room_label,
    a.device_key,
    coalesce(x.label, a.exam_type, '(not mapped)') as exam_label,
    a.rule,
    a.family,
    a.quantity,
    a.value,
    a.threshold,
    a.unit,
    case when a.value > 0 and a.threshold > 0
         then greatest(a.value / a.threshold, a.threshold / a.value) end as factor,
    a.method,
    a.threshold_verified,
    a.source
from dose_alerts as a
left join dash_device as d on d.device_key = a.device_key
left join dash_exam_type as x on x.exam_type = a.exam_type
order by case a.action when 'patient_follow_up' then 1 when 'protocol_review' then 2 else 3 end,
         factor desc nulls last, a.study_date, a.rule, a.study_key
