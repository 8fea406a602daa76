-- grain: one row per exam type x quantity x paediatric band (age or weight band of the
--   reference; 'no reference' when the warehouse holds none for the exam)
-- question: what share of paediatric exams lies above the paediatric reference level?
-- columns: exam_type, quantity, unit, band, n_exams, n_with_reference, n_above_reference,
--   share_above_reference, reference_sets
-- parameters: adult_min_age=16
-- note: paediatric = age below adult_min_age (unknown ages are left out). An exam is compared
--   with a paediatric reference level (reference_level, population 'paediatric') of its exam
--   type and quantity whose age or weight band holds the patient and that was in force on the
--   study date (the latest such set). share_above_reference = n_above_reference /
--   n_with_reference, NULL without any reference. A DRL applies to the median of a room's
--   exams, not to one exam: this share describes the spread, it is not a count of findings;
--   a DRL is an investigation level, not a dose limit.
-- run: kerma sql --warehouse kerma-demo/kerma.duckdb --file queries/examples/paediatric_above_reference.sql --param adult_min_age=16
with
paediatric as (
    select o.*, row_number() over () as observation_id
    from audit_observation as o
    where o.patient_age_years < $adult_min_age and o.modality <> 'MG'
),
levels as (
    select r.*,
           case length(r.valid_to) when 4 then r.valid_to || '-12-31'
                                   when 7 then r.valid_to || '-31'
                                   else r.valid_to end as valid_to_day
    from reference_level as r
    where r.population = 'paediatric'
),
compared as (
    select p.exam_type, p.quantity, p.unit, p.value, p.observation_id,
           l.set_id, l.value_canonical,
           case when l.age_min_years is not null or l.age_max_years is not null
                then 'age ' || coalesce(cast(l.age_min_years as varchar), '0') || ' to <'
                     || coalesce(cast(l.age_max_years as varchar), '')
                when l.weight_min_kg is not null or l.weight_max_kg is not null
                then 'weight ' || coalesce(cast(l.weight_min_kg as varchar), '0') || ' to <'
                     || coalesce(cast(l.weight_max_kg as varchar), '') || ' kg'
                when l.set_id is not null then 'all paediatric'
                else 'no reference' end as band
    from paediatric as p
    left join levels as l
      on l.exam_type = p.exam_type and l.quantity = p.quantity
     and l.effective_date <= strftime(p.study_date, '%Y-%m-%d')
     and (l.valid_to_day is null or l.valid_to_day >= strftime(p.study_date, '%Y-%m-%d'))
     and (l.age_min_years is null or p.patient_age_years >= l.age_min_years)
     and (l.age_max_years is null or p.patient_age_years < l.age_max_years)
     and (l.weight_min_kg is null or p.patient_weight_kg >= l.weight_min_kg)
     and (l.weight_max_kg is null or p.patient_weight_kg < l.weight_max_kg)
    qualify row_number() over (partition by p.observation_id
                               order by l.effective_date desc nulls last, l.set_id) = 1
)
select
    exam_type,
    quantity,
    unit,
    band,
    count(*) as n_exams,
    count(value_canonical) as n_with_reference,
    count(*) filter (where value > value_canonical) as n_above_reference,
    count(*) filter (where value > value_canonical) / nullif(count(value_canonical), 0)
        as share_above_reference,
    string_agg(distinct set_id, '; ') as reference_sets
from compared
group by exam_type, quantity, unit, band
order by exam_type, quantity, band
