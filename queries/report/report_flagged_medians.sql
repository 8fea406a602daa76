-- grain: one row per audit group (audit_medians) whose median is above its reference level or
-- below half of it, with display labels and item_id
select
    a.item_id,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    coalesce(d.room_label, a.device_key) as room_label,
    a.device_key,
    coalesce(x.label, a.exam_type) as exam_label,
    a.quantity, a.unit, a.population, a.stratum, a.n, a.median, a.reference_value,
    a.ratio_to_reference, a.reference_set, a.is_above_reference, a.is_sample_adequate,
    a.min_sample, a.reference_scope_note
from audit_medians as a
left join dash_device as d on d.device_key = a.device_key
left join dash_exam_type as x on x.exam_type = a.exam_type
where a.is_above_reference or a.is_well_below_reference
order by a.is_above_reference desc, a.ratio_to_reference desc, site_label, room_label
