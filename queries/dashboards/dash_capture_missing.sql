-- grain: one row per archive study without any dose object (pseudonymous study_key only)
select
    m.study_date,
    m.study_key,
    m.modality,
    coalesce(m.station_name, '(no station name)') as station_name,
    coalesce(d.site_label, '(site not known)') as site_label
from capture_missing_studies as m
left join dash_device as d on d.device_key = m.device_key
order by m.study_date, m.modality, station_name, m.study_key
