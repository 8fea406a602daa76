-- grain: one row per exam type x quantity x population x stratum (x phantom) of network_reference, labelled
select
    n.period,
    n.exam_type,
    coalesce(x.label, n.exam_type) as exam_label,
    n.quantity,
    n.unit,
    n.population,
    n.stratum,
    n.phantom,
    n.n_rooms,
    n.n_rooms_all,
    n.n_sites,
    n.n_exams,
    n.typical_value,
    n.p75_of_room_medians,
    n.is_local_drl,
    n.local_drl,
    n.min_rooms_local_drl,
    n.reference_set,
    n.reference_value,
    n.p75_of_room_medians / n.reference_value as ratio_p75_to_reference,
    n.reference_body,
    n.reference_indication,
    n.reference_scope_note
from network_reference as n
left join dash_exam_type as x on x.exam_type = n.exam_type
order by exam_label, n.quantity, n.population, n.stratum, n.phantom
