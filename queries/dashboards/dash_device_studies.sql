-- grain: one row per irradiating device with a study in the audit period: site, room,
-- modality and the number of studies (the detail of the overview's studies and devices tiles)
with
per_study as (
    -- the period's studies (dash_period_study, made by dash_period_studies.sql) per device
    -- label: the studies of one row as counted per device, every other study once
    -- per label it has rows under
    select d.site_label, d.room_label, d.modality, d.manufacturer, d.model,
           d.family_order, p.n_studies
    from dash_period_study as p
    join dash_device as d on d.device_key = p.device_key
    where not p.is_study_row
    union all
    select d.site_label, d.room_label, d.modality, d.manufacturer, d.model,
           min(d.family_order), 1
    from dash_period_study as p
    join dash_device as d on d.device_key = p.device_key
    where p.is_study_row and p.study_key is not null   -- a distinct count leaves NULL out
    group by d.site_label, d.room_label, d.modality, d.manufacturer, d.model, p.study_key
)
select
    site_label,
    room_label,
    modality,
    manufacturer,
    model,
    sum(n_studies)::bigint as n_studies
from per_study
group by site_label, room_label, modality, manufacturer, model
order by min(family_order), site_label, room_label
