-- grain: one row per exam type x patient age (NULL: unknown) among the CT studies up to the period end
select distinct exam_type, patient_age_years
from study_dose
where modality = 'CT' and study_date < $date_to and exam_type is not null
