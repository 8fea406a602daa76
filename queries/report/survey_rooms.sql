-- grain: one row per room (device) x exam type x population x quantity in [$date_from, $date_to):
-- what national dose surveys ask per room (n, median and mean of the reference quantity, median
-- age, weight and tube voltage) and the reference set the audit compared the room with
with
obs as (
    select o.*,
           case when o.modality = 'MG' then 'all'
                when o.patient_age_years is null then 'unknown_age'
                when o.patient_age_years >= $adult_min_age then 'adult'
                else 'paediatric' end as population
    from audit_observation as o
    where o.study_date >= $date_from and o.study_date < $date_to and o.value is not null
),
kvp as (
    -- per unit of observation: the event's own kVp, else the median over the study's events
    select e.study_key, e.device_key, e.event_uid, e.kvp
    from irradiation_event as e where e.kvp is not null
),
joined as (
    select o.*, coalesce(k1.kvp, (select median(k2.kvp) from kvp as k2
                                  where k2.study_key = o.study_key and k2.device_key = o.device_key))
               as kvp
    from obs as o
    left join kvp as k1 on k1.event_uid = o.event_uid
)
select
    coalesce(d.site_label, j.site, '(site not known)') as site,
    coalesce(d.room_label, j.device_key) as room,
    j.device_key,
    j.modality,
    j.exam_type,
    j.population,
    j.quantity,
    j.unit,
    count(*) as n,
    count(distinct j.study_key) as n_studies,
    median(j.value) as median_value,
    avg(j.value) as mean_value,
    median(j.patient_age_years) as median_age_years,
    median(j.patient_weight_kg) as median_weight_kg,
    count(j.patient_weight_kg) as n_with_weight,
    median(j.kvp) as median_kvp,
    (select string_agg(distinct a.reference_set, '; ')
     from audit_medians as a
     where a.device_key = j.device_key and a.exam_type = j.exam_type
       and a.quantity = j.quantity and a.population = j.population) as reference_set
from joined as j
left join dash_device as d on d.device_key = j.device_key
group by all
order by j.exam_type, site, room, j.population, j.quantity
