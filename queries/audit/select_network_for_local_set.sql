-- grain: one row per exam type x quantity with an adequate network sample: the latest audit's values
select period, exam_type, quantity, unit, population, phantom, n_rooms, n_exams, p75_of_room_medians
from network_reference
where n_rooms >= 1 and p75_of_room_medians is not null
order by exam_type, quantity
