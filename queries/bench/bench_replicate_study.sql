-- grain: one row per study and copy k (benchmark scale-up of a real warehouse; copy 0 is the original)
insert into raw_study by name
select s.* replace (s.study_key || '~' || c.k as study_key, s.patient_key || '~' || c.k as patient_key)
from raw_study as s, range(1, $copies) as c (k)
where s.study_key not like '%~%'
