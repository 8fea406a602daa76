-- grain: one row per irradiating device (view `device`), with the labels the dashboards show
-- room_label: the Station Name, else the pseudonymous device key; a Station Name shared by
-- several devices gets the end of the device key appended so every label is unique.
with
base as (
    select
        device_key,
        coalesce(nullif(trim(site), ''), '(site not known)') as site_label,
        modality,
        coalesce(nullif(trim(station_name), ''), device_key) as station_label,
        manufacturer,
        model
    from device
),
labelled as (
    select
        *,
        case when count(*) over (partition by station_label) > 1
             then station_label || ' ~' || right(device_key, 6)
             else station_label end as room_label
    from base
)
select
    device_key,
    site_label,
    room_label,
    modality,
    case when modality = 'CT' then 'CT'
         when modality in ('DX', 'CR') then 'Radiography'
         when modality in ('RF', 'XA') then 'Fluoroscopy and interventional'
         when modality = 'MG' then 'Mammography'
         else coalesce(modality, 'Other') end as modality_family,
    case when modality = 'CT' then 1
         when modality in ('DX', 'CR') then 2
         when modality in ('RF', 'XA') then 3
         when modality = 'MG' then 4
         else 5 end as family_order,
    manufacturer,
    model
from labelled
order by family_order, site_label, room_label
