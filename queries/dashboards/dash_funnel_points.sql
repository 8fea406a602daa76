-- grain: one row per audit group (room x exam type x quantity x population x stratum x phantom)
-- whose network typical value exists: its ratio to the network typical value (ICRP 135: median of
-- the room medians) and where it sits in the funnel; the reference level is a separate value
-- (reference_ratio_to_typical), drawn as its own mark, never the funnel's centre.
-- Standard error of ln(median) ~ sqrt(pi/2) sigma / sqrt(n) = 1.2533 sigma / sqrt(n)
-- (asymptotic, log-normal doses); z = ln(ratio to typical) / se; upper control limits at
-- z = 1.96 (95 %) and 3.09 (99.8 %). Only "above the upper limit" is counted: a room below
-- the network's typical value is not a finding of this plot.
with
points as (
    select
        a.*,
        t.typical_value,
        s.sigma_log,
        1.2533 * s.sigma_log / sqrt(a.n) as se_log
    from audit_medians as a
    join network_reference as t
      on t.exam_type = a.exam_type and t.quantity = a.quantity and t.population = a.population
     and t.stratum is not distinct from a.stratum and t.phantom is not distinct from a.phantom
    join funnel_sigma as s on s.quantity = a.quantity
    where t.typical_value > 0 and a.median > 0
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
    p.stratum,
    p.phantom,
    p.n,
    p.median,
    p.typical_value,
    p.median / p.typical_value as ratio_to_typical,
    p.reference_value,
    p.reference_value / p.typical_value as reference_ratio_to_typical,
    p.reference_set,
    p.ratio_to_reference,
    p.is_above_reference,
    p.is_sample_adequate,
    p.sigma_log,
    p.se_log,
    ln(p.median / p.typical_value) / nullif(p.se_log, 0) as z,
    exp(1.959964 * p.se_log) as upper_95,
    exp(3.090232 * p.se_log) as upper_998,
    case when p.se_log is null or p.se_log = 0 then 'not assessed'
         when ln(p.median / p.typical_value) / p.se_log > 3.090232 then 'above 99.8 % limit'
         when ln(p.median / p.typical_value) / p.se_log > 1.959964 then 'above 95 % limit'
         else 'not above the limits' end as funnel_zone
from points as p
left join dash_device as d on d.device_key = p.device_key
left join dash_exam_type as x on x.exam_type = p.exam_type
order by ratio_to_typical desc, site_label, room_label, exam_label, p.quantity
