-- grain: one row per skin cell with dose > 0 of each study x device with a peak-skin-dose alert
-- (dose_alerts family peak_skin_dose): cell dose in Gy on the unrolled phantom surface
select
    m.study_key, m.device_key, left(m.study_key, 8) as study_label,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    a.study_date, a.value / 1000.0 as psd_gy, a.threshold / 1000.0 as threshold_gy,
    m.around_mm, m.along_mm, m.dose_mgy / 1000.0 as dose_gy
from skin_dose_map as m
join dose_alerts as a
  on a.study_key = m.study_key and a.device_key = m.device_key and a.family = 'peak_skin_dose'
left join dash_device as d on d.device_key = m.device_key
order by a.value desc, m.study_key, m.around_mm, m.along_mm
