-- grain: one row per CT acquisition (localizers excluded) of a study in the period: its CTDIvol and
-- scanning range (TID 10014 Top / Bottom Z Location of Scanning Length, DCM 113897 / 113898, mm)
select e.study_key, e.device_key, e.ctdivol_mgy,
       e.top_z_scanning_length_mm as z_a_mm, e.bottom_z_scanning_length_mm as z_b_mm
from irradiation_event as e
join study_dose as s using (study_key, device_key)
where s.study_date >= $date_from and s.study_date < $date_to
  and e.event_type in ('spiral', 'sequenced', 'stationary') and e.ctdivol_mgy is not null
order by e.study_key, e.device_key
