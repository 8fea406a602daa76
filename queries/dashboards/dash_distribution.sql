-- grain: one row per site x device x exam type x quantity x population x phantom in the period:
-- order statistics of the audited values (audit_distribution, written by the audit: quantile_cont,
-- Hyndman & Fan definition 7, over values rounded to 1e-9), the same groups as audit_medians,
-- whose reference value and sample verdict are joined on.
with
stats as (
    select * from audit_distribution
),
audited as (
    -- audit_medians splits paediatric and mammography groups into strata: a distribution
    -- spans them, so it takes a reference only when exactly one stratum carries one
    select device_key, exam_type, quantity, population, phantom,
           case when count(reference_set) = 1 then max(reference_set) end as reference_set,
           case when count(reference_value) = 1 then max(reference_value) end as reference_value,
           sum(n) >= max(min_sample) as is_sample_adequate
    from audit_medians
    group by all
)
select
    s.device_key,
    coalesce(d.site_label, '(site not known)') as site_label,
    coalesce(d.room_label, s.device_key) as room_label,
    coalesce(d.modality_family, 'Other') as modality_family,
    coalesce(d.family_order, 5) as family_order,
    s.exam_type,
    coalesce(x.label, s.exam_type) as exam_label,
    s.quantity, s.unit, s.population, s.phantom,
    s.n, s.value_min, s.p05, s.p25, s.median, s.p75, s.p95,
    s.value_max,
    a.reference_set,
    a.reference_value,
    coalesce(a.is_sample_adequate, false) as is_sample_adequate
from stats as s
left join dash_device as d on d.device_key = s.device_key
left join dash_exam_type as x on x.exam_type = s.exam_type
left join audited as a
  on a.device_key = s.device_key and a.exam_type = s.exam_type and a.quantity = s.quantity
 and a.population = s.population and a.phantom is not distinct from s.phantom
order by family_order, exam_label, s.quantity, s.phantom, s.population, site_label, room_label
