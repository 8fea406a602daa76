-- grain: one row per exam type x quantity x population x stratum (x phantom) with an adequate network sample: the latest audit's values
select period, exam_type, quantity, unit, population, stratum, phantom, n_rooms, n_exams,
       p75_of_room_medians, is_local_drl, min_rooms_local_drl
from network_reference
where n_rooms >= 1 and p75_of_room_medians is not null
  and population in ('adult', 'paediatric', 'all') and stratum is null
order by exam_type, quantity
