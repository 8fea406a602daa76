-- grain: one row per skin cell with dose > 0 of each of the $max_maps studies x devices with the
-- highest peak-skin-dose alert (dose_alerts family peak_skin_dose): cell dose in Gy on the
-- unrolled phantom surface; n_maps is the number of studies x devices with such an alert (the
-- page draws the first $max_maps; skin_dose_map keeps every map's cells)
with
alerted as (
    select study_key, device_key, site, study_date, value, threshold,
           row_number() over (order by value desc, study_key, device_key) as map_rank,
           count(*) over () as n_maps
    from (select study_key, device_key, arg_max(site, value) as site,
                 arg_max(study_date, value) as study_date, max(value) as value,
                 arg_max(threshold, value) as threshold
          from dose_alerts
          where family = 'peak_skin_dose'
          group by study_key, device_key)
)
select
    m.study_key, m.device_key, left(m.study_key, 8) as study_label,
    coalesce(d.site_label, a.site, '(site not known)') as site_label,
    a.study_date, a.value / 1000.0 as psd_gy, a.threshold / 1000.0 as threshold_gy,
    m.around_mm, m.along_mm, m.dose_mgy / 1000.0 as dose_gy, a.n_maps
from skin_dose_map as m
join alerted as a on a.study_key = m.study_key and a.device_key = m.device_key
left join dash_device as d on d.device_key = m.device_key
where a.map_rank <= $max_maps
order by a.map_rank, m.around_mm, m.along_mm
