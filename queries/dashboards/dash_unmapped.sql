-- grain: one row per modality x study description in the period that no exam rule maps
select
    s.modality,
    coalesce(s.study_description, '(no study description)') as study_description,
    string_agg(distinct e.acquisition_protocol, '; ' order by e.acquisition_protocol)
        as acquisition_protocols,
    -- study_dose's site is the view device's, the one dash_device labels (see dash_weight_share)
    string_agg(distinct coalesce(d.site_label, '(site not known)'), '; '
               order by coalesce(d.site_label, '(site not known)')) as sites,
    count(distinct s.study_key) as n_studies
from dash_period_unmapped as s   -- made by dash_period_unmapped.sql
left join irradiation_event as e on e.study_key = s.study_key and e.device_key = s.device_key
left join dash_device as d on d.device_key = s.device_key
group by all
order by n_studies desc, s.modality, study_description
