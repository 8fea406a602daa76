-- grain: one row per audit group with a reference value (room x exam type x quantity x
-- population x phantom): its ratio to the reference level and where it sits in the funnel
-- Standard error of ln(median) ~ sqrt(pi/2) sigma / sqrt(n) = 1.2533 sigma / sqrt(n)
-- (asymptotic, log-normal doses); z = ln(ratio) / se; control limits at z = +-1.96 (95 %)
-- and +-3.09 (99.8 %) around ratio 1, the reference level.
with
points as (
    select
        a.*,
        s.sigma_log,
        1.2533 * s.sigma_log / sqrt(a.n) as se_log
    from audit_medians as a
    join funnel_sigma as s on s.quantity = a.quantity
    where a.reference_value is not null and a.median > 0
)
select
    p.device_key,
    coalesce(d.site_label, p.site, '(site not known)') as site_label,
    coalesce(d.room_label, p.device_key) as room_label,
    coalesce(d.modality_family, 'Other') as modality_family,
    p.exam_type,
    coalesce(x.label, p.exam_type) as exam_label,
    p.quantity,
    p.unit,
    p.population,
    p.phantom,
    p.n,
    p.median,
    p.reference_value,
    p.reference_set,
    p.ratio_to_reference,
    p.is_above_reference,
    p.is_sample_adequate,
    p.sigma_log,
    p.se_log,
    ln(p.ratio_to_reference) / nullif(p.se_log, 0) as z,
    exp(-3.090232 * p.se_log) as lower_998,
    exp(-1.959964 * p.se_log) as lower_95,
    exp(1.959964 * p.se_log) as upper_95,
    exp(3.090232 * p.se_log) as upper_998,
    case when p.se_log is null or p.se_log = 0 then 'not assessed'
         when ln(p.ratio_to_reference) / p.se_log > 3.090232 then 'above 99.8 % limit'
         when ln(p.ratio_to_reference) / p.se_log > 1.959964 then 'above 95 % limit'
         when ln(p.ratio_to_reference) / p.se_log < -3.090232 then 'below 99.8 % limit'
         when ln(p.ratio_to_reference) / p.se_log < -1.959964 then 'below 95 % limit'
         else 'within limits' end as funnel_zone
from points as p
left join dash_device as d on d.device_key = p.device_key
left join dash_exam_type as x on x.exam_type = p.exam_type
order by p.ratio_to_reference desc, site_label, room_label, exam_label, p.quantity
