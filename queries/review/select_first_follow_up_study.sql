-- grain: at most one row: the earliest study with a patient_follow_up alert (what the demo
-- shows the key holder's re-identification command for)
select study_key
from dose_alerts
where action = 'patient_follow_up'
order by study_date, study_key
limit 1
