-- grain: one row per skin cell with dose > 0 of each study x device whose peak skin dose reached
-- a peak-skin-dose alert in the last audit (the committee report's skin-dose figures)
-- around_mm: arc length from the front midline via the patient's right; along_mm: towards the head
select
    m.study_key, m.device_key, k.psd_mgy, k.method, k.uncertainty_note, k.phantom,
    m.around_mm, m.along_mm, m.dose_mgy
from skin_dose_map as m
join skin_dose as k using (study_key, device_key)
where m.study_key in (select study_key from report_detail_study)
  and exists (select 1 from dose_alerts as a
              where a.study_key = m.study_key and a.device_key = m.device_key
                and a.family = 'peak_skin_dose')
order by m.study_key, m.device_key, m.around_mm, m.along_mm
