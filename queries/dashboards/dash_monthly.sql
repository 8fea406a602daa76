-- grain: one row per device x exam type x quantity (x phantom) x calendar month of
-- monthly_medians (adults, history up to the period end), with labels and the adult reference
select
    m.device_key,
    coalesce(d.site_label, m.site, '(site not known)') as site_label,
    coalesce(d.room_label, m.device_key) as room_label,
    coalesce(d.modality_family, 'Other') as modality_family,
    coalesce(d.family_order, 5) as family_order,
    m.exam_type,
    coalesce(x.label, m.exam_type) as exam_label,
    m.quantity,
    m.unit,
    m.phantom,
    m.month,
    m.n,
    m.median,
    m.p25,
    m.p75,
    n.reference_value,
    n.reference_set
from monthly_medians as m
left join dash_device as d on d.device_key = m.device_key
left join dash_exam_type as x on x.exam_type = m.exam_type
left join network_reference as n
  on n.exam_type = m.exam_type and n.quantity = m.quantity and n.population = 'adult'
 and n.phantom is not distinct from m.phantom
order by family_order, exam_label, m.quantity, m.phantom, site_label, room_label, m.month
