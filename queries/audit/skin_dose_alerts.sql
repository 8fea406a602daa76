-- grain: one row per RF/XA study x peak-skin-dose rule whose estimate reaches the threshold
-- (NCRP Report No. 168: patient follow-up at a peak skin dose of 3 Gy)
insert into dose_alerts by name
select k.study_key, k.patient_key, k.device_key, k.site, k.exam_type, k.study_date, r.rule,
       r.family, r.action, r.verified as threshold_verified, r.quantity,
       k.psd_mgy as value, r.threshold, r.unit, r.source,
       'peak skin dose estimate: ' || k.method || ' (' || k.uncertainty_note || ')' as method
from skin_dose as k
join alert_rule_in_force as r on r.family = 'peak_skin_dose'
where k.psd_mgy >= r.threshold
