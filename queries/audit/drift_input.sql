-- grain: one row per audited adult observation (age known) up to the period end (input of the change-point test)
select device_key, site, exam_type, quantity, unit, period, value
from audit_observation
where study_date < $date_to
  and patient_age_years >= $adult_min_age  -- unknown age is not adult
  and (quantity <> 'ctdivol' or phantom is not null)
