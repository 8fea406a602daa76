-- grain: one row per CT exam type x device in the period: SSDE and the population-average
-- effective-dose estimate of study_estimate (not an individual patient's risk)
select
    coalesce(x.label, e.exam_type, '(not mapped)') as exam_label,
    coalesce(d.site_label, '(site not known)') as site_label,
    coalesce(d.room_label, e.device_key) as room_label,
    count(*) as n_studies,
    count(e.effective_dose_msv) as n_with_effective_dose,
    quantile_cont(e.effective_dose_msv, 0.5) as median_effective_dose_msv,
    quantile_cont(e.effective_dose_msv, 0.25) as p25_effective_dose_msv,
    quantile_cont(e.effective_dose_msv, 0.75) as p75_effective_dose_msv,
    string_agg(distinct e.effective_dose_basis, '; ' order by e.effective_dose_basis)
        as effective_dose_basis,
    count(e.ssde_mgy) as n_with_ssde,
    count(e.ssde_mgy) filter (where e.ssde_method like 'reported%') as n_ssde_reported,
    quantile_cont(e.ssde_mgy, 0.5) as median_ssde_mgy
from study_estimate as e
left join dash_device as d on d.device_key = e.device_key
left join dash_exam_type as x on x.exam_type = e.exam_type
where e.study_date >= $date_from and e.study_date < $date_to
group by all
order by exam_label, site_label, room_label
