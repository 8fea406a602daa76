-- grain: one row: studies in the period, and those no exam rule maps
select count(*), count(*) filter (where exam_type is null)
from study_dose where study_date >= $date_from and study_date < $date_to
