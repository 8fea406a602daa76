-- grain: one row per (modality, station) of the last completeness check (kerma completeness)
select
    c.period,
    c.modality,
    coalesce(c.station_name, '(no station name)') as station_name,
    coalesce(d.site_label, '(site not known)') as site_label,
    coalesce(d.room_label, c.station_name) as room_label,
    c.n_archive_studies,
    c.n_with_dose_object,
    c.share_with_dose_object,
    100.0 * c.share_with_dose_object as pct_with_dose_object
from capture_completeness as c
left join dash_device as d on d.device_key = c.device_key
order by c.share_with_dose_object, c.modality, station_name
