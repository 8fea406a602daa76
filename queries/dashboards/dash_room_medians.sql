-- grain: one row per audit group of audit_medians (site x device x exam type x quantity x
-- population x stratum x CTDIvol phantom), with display labels and the network's own values
select
    a.period,
    a.device_key,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    coalesce(d.room_label, a.device_key) as room_label,
    coalesce(d.modality_family, 'Other') as modality_family,
    coalesce(d.family_order, 5) as family_order,
    a.exam_type,
    coalesce(x.label, a.exam_type) as exam_label,
    a.quantity,
    a.unit,
    a.population,
    a.stratum,
    a.phantom,
    a.n,
    a.min_sample,
    a.n_patients,
    a.n_with_weight,
    a.median,
    a.p25,
    a.p75,
    a.median_ci_low,
    a.median_ci_high,
    a.n_standard_size,
    a.median_standard_size,
    a.reference_set,
    a.reference_value,
    a.ratio_to_reference,
    a.is_above_reference,
    a.is_well_below_reference,
    a.is_sample_adequate,
    n.typical_value as network_typical_value,
    n.p75_of_room_medians as network_p75,
    n.n_rooms as network_n_rooms,
    a.median / n.p75_of_room_medians as ratio_to_network_p75,
    n.is_local_drl as network_is_local_drl,
    a.reference_citation,
    a.reference_body,
    a.reference_indication,
    a.reference_scope_note
from audit_medians as a
left join dash_device as d on d.device_key = a.device_key
left join dash_exam_type as x on x.exam_type = a.exam_type
left join network_reference as n
  on n.exam_type = a.exam_type and n.quantity = a.quantity and n.population = a.population
 and n.stratum is not distinct from a.stratum and n.phantom is not distinct from a.phantom
order by family_order, exam_label, a.quantity, a.population, a.stratum, a.phantom, site_label, room_label
