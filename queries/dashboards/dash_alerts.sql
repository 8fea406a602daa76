-- grain: one row per study x rule that fired (dose_alerts), pseudonymous keys only, most
-- exceeded first; latest_note: the item's latest review note; factor: how far the value lies beyond its threshold (>= 1)
select
    a.study_date,
    a.study_key,
    a.patient_key,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    coalesce(d.room_label, a.device_key) as room_label,
    coalesce(x.label, a.exam_type, '(not mapped)') as exam_label,
    a.rule,
    a.family,
    a.action,
    a.quantity,
    a.value,
    a.threshold,
    a.unit,
    case when a.value > 0 and a.threshold > 0
         then greatest(a.value / a.threshold, a.threshold / a.value) end as factor,
    a.source,
    a.method,
    a.threshold_verified,
    a.item_id,
    n.status || ': ' || n.note_text || ' (' || n.noted_by || ', '
        || strftime(n.noted_at, '%Y-%m-%d') || ')' as latest_note
from dose_alerts as a
left join latest_review_note as n on n.item_id = a.item_id
left join dash_device as d on d.device_key = a.device_key
left join dash_exam_type as x on x.exam_type = a.exam_type
order by factor desc nulls last, a.study_date, a.rule, a.study_key
