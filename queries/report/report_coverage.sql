-- grain: one row per modality: exam types of the audited period compared with a national
-- reference level, with the network typical value only (ICRP 135), or with nothing
with
groups as (
    select coalesce(d.modality, 'unknown') as modality, a.exam_type, a.quantity, a.n,
           a.reference_set is not null as has_reference,
           n.typical_value is not null as has_network
    from audit_medians as a
    left join device as d on d.device_key = a.device_key
    left join network_reference as n
      on n.exam_type = a.exam_type and n.quantity = a.quantity and n.population = a.population
     and n.stratum is not distinct from a.stratum and n.phantom is not distinct from a.phantom
    where a.exam_type is not null
),
per_quantity as (
    select modality, exam_type, quantity, sum(n) as n_exams,
           bool_or(has_reference) as has_reference, bool_or(has_network) as has_network
    from groups group by all
),
per_exam as (
    select modality, exam_type, max(n_exams) as n_exams,
           bool_or(has_reference) as has_reference, bool_or(has_network) as has_network
    from per_quantity group by all
)
select modality,
       count(*) as n_exam_types,
       count(*) filter (where has_reference) as n_national,
       count(*) filter (where not has_reference and has_network) as n_network_only,
       count(*) filter (where not has_reference and not has_network) as n_not_compared,
       sum(n_exams) as n_exams,
       coalesce(sum(n_exams) filter (where has_reference), 0) as n_exams_national,
       string_agg(exam_type, ', ' order by exam_type) filter (where not has_reference and not has_network)
           as not_compared_exam_types
from per_exam
group by modality
order by modality
