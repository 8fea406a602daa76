-- grain: one row per modality x study description that no exam rule maps, with counts
select s.modality, coalesce(s.study_description, '(no study description)') as study_description,
       string_agg(distinct e.acquisition_protocol, '; ') as acquisition_protocols,
       count(distinct s.study_key) as n_studies
from study_dose as s
left join irradiation_event as e using (study_key, device_key)
where s.exam_type is null
group by all
order by n_studies desc, s.modality, study_description
