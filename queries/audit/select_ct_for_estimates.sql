-- grain: one row per CT study x device up to the period end, with what SSDE and E need
select s.study_key, s.patient_key, s.device_key, s.exam_type, s.study_date, s.patient_age_years,
       s.dlp_total_mgy_cm, s.ctdivol_mgy, s.ctdi_phantom,
       avg(e.water_equivalent_diameter_mm) filter (where e.event_type in ('spiral', 'sequenced'))
           as water_equivalent_diameter_mm,
       sum(e.ssde_mgy * e.scanning_length_mm) filter (where e.event_type in ('spiral', 'sequenced'))
         / nullif(sum(e.scanning_length_mm) filter (
               where e.event_type in ('spiral', 'sequenced') and e.ssde_mgy is not null), 0)
           as reported_ssde_mgy
from study_dose as s
left join irradiation_event as e using (study_key, device_key)
where s.modality = 'CT' and s.study_date < $date_to
group by all
