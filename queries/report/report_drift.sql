-- grain: one row per device x exam type x quantity with a change point (drift_flags), labelled, with item_id
select
    f.item_id,
    coalesce(d.site_label, f.site, '(site not known)') as site_label,
    coalesce(d.room_label, f.device_key) as room_label,
    f.device_key,
    coalesce(x.label, f.exam_type) as exam_label,
    f.quantity, f.unit, f.change_month, f.median_before, f.median_after,
    f.ratio_after_to_before, f.n_before, f.n_after, f.p_value_bonferroni
from drift_flags as f
left join dash_device as d on d.device_key = f.device_key
left join dash_exam_type as x on x.exam_type = f.exam_type
order by site_label, room_label, exam_label, f.quantity
