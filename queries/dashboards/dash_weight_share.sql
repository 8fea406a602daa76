-- grain: one row per site x modality in the period: how many studies record patient weight,
-- height and age (SSDE, standard-size medians and paediatric grouping depend on them)
select
    coalesce(d.site_label, s.site, '(site not known)') as site_label,
    s.modality,
    count(distinct s.study_key) as n_studies,
    count(distinct s.study_key) filter (where s.patient_weight_kg is not null) as n_with_weight,
    count(distinct s.study_key) filter (where s.patient_height_m is not null) as n_with_height,
    count(distinct s.study_key) filter (where s.patient_age_years is not null) as n_with_age,
    100.0 * count(distinct s.study_key) filter (where s.patient_weight_kg is not null)
        / count(distinct s.study_key) as pct_with_weight
from study_dose as s
left join dash_device as d on d.device_key = s.device_key
where s.study_date >= $date_from and s.study_date < $date_to
group by all
order by site_label, s.modality
