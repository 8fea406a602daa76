-- grain: one row per irradiating device with a study in the audit period: site, room,
-- modality and the number of studies (the detail of the overview's studies and devices tiles)
select
    d.site_label,
    d.room_label,
    d.modality,
    d.manufacturer,
    d.model,
    count(distinct s.study_key) as n_studies
from study_dose as s
join dash_device as d on d.device_key = s.device_key
where s.study_date >= $date_from and s.study_date < $date_to
group by all
order by min(d.family_order), d.site_label, d.room_label
