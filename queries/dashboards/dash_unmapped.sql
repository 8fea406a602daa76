-- grain: one row per modality x study description in the period that no exam rule maps
select
    s.modality,
    coalesce(s.study_description, '(no study description)') as study_description,
    string_agg(distinct e.acquisition_protocol, '; ' order by e.acquisition_protocol)
        as acquisition_protocols,
    string_agg(distinct coalesce(d.site_label, s.site, '(site not known)'), '; '
               order by coalesce(d.site_label, s.site, '(site not known)')) as sites,
    count(distinct s.study_key) as n_studies
from study_dose as s
left join irradiation_event as e on e.study_key = s.study_key and e.device_key = s.device_key
left join dash_device as d on d.device_key = s.device_key
where s.exam_type is null and s.study_date >= $date_from and s.study_date < $date_to
group by all
order by n_studies desc, s.modality, study_description
