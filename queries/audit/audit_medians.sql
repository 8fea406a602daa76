-- grain: one row per site x device x exam type x quantity x population x stratum (x CTDIvol phantom) in the period
-- Percentiles: quantile_cont = linear interpolation between order statistics (Hyndman & Fan
-- 1996 definition 7). median_ci_*: distribution-free 95 % interval from order statistics,
-- ranks from the exact binomial(n, 1/2) (Conover 1999, sec. 3.2), table median_ci_rank.
-- population: adult | paediatric | unknown_age (no age: its own group, never adult) | all
-- (mammography: no age split). stratum: paediatric age band (head) or weight band (body),
-- EC RP 185 / ICRP 135; compressed-breast-thickness band for mammography; NULL for adults.
-- A reference is compared only with the same exam type, quantity, population and band, and
-- CTDIvol only when the reference's source states its phantom and it equals the group's;
-- reference_scope_note says what else the reader must know (indication, fallback, why not).
-- Every group lies within one room, so the statement runs over parts of the rooms ($part of
-- $parts, by a hash of device_key) when the period holds many observations: the quantile and list
-- states, which DuckDB holds in memory, then stay within the audit's memory limit.
create or replace table audit_medians as
with
observed as (
    select o.*,
           case when o.modality = 'MG' then 'all'
                when o.patient_age_years is null then 'unknown_age'
                when o.patient_age_years >= $adult_min_age then 'adult'
                else 'paediatric' end as population,
           o.patient_weight_kg between $weight_min and $weight_max as is_standard_size,
           coalesce(b.basis, 'weight') as stratum_basis
    from audit_input as o
    left join exam_stratum_basis as b using (exam_type)
    where o.study_date >= $date_from and o.study_date < $date_to
      and hash(o.device_key) % $parts = $part   -- one part of the rooms (pipeline.audit._by_parts)
),
obs as (
    select o.*,
           case o.stratum_basis when 'age' then o.patient_age_years
                                when 'weight' then o.patient_weight_kg
                                else o.compressed_breast_thickness_mm end as stratum_value
    from observed as o
),
stratified as (
    select o.*,
           case when o.population in ('paediatric', 'all')
                then coalesce(s.stratum, o.stratum_basis || ' unknown') end as stratum,
           s.low as stratum_low, s.high as stratum_high
    from obs as o
    left join stratum_band as s
      on o.population in ('paediatric', 'all') and s.basis = o.stratum_basis
     and o.stratum_value >= s.low and (s.high is null or o.stratum_value < s.high)
),
grouped as (
    -- unit follows from quantity, stratum_basis from exam_type, a stratum label from its basis
    -- and band edges (pipeline.strata: one label per band), and site from device_key (device:
    -- one row per device_key): carried, not grouped on (each grouping column costs a hash and a
    -- compare per observation; without site, 4.03 against 4.55 CPU-s for one of four parts at
    -- 10M events, measured, no other source)
    select device_key, modality, exam_type, quantity, population, stratum, phantom,
           any_value(site) as site, any_value(unit) as unit, any_value(stratum_basis) as stratum_basis,
           any_value(stratum_low) as stratum_low, any_value(stratum_high) as stratum_high,
           count(*) as n,
           quantile_cont(value, [0.5, 0.25, 0.75]) as quartiles,
           list_sort(list(value)) as sorted_values,
           count(*) filter (where is_standard_size) as n_standard_size,
           quantile_cont(value, 0.5) filter (where is_standard_size) as median_standard_size,
           count(patient_weight_kg) as n_with_weight,
           count(distinct patient_key) as n_patients
    from stratified
    group by device_key, modality, exam_type, quantity, population, stratum, phantom
),
groups as (
    select * exclude (quartiles), quartiles[1] as median, quartiles[2] as p25,
           quartiles[3] as p75
    from grouped
),
indication_counts as (
    select site, device_key, exam_type, quantity, population, stratum, phantom, indication,
           count(*) as n_with_indication
    from stratified
    where indication is not null
    group by all
),
with_ci as (
    select g.*, g.sorted_values[r.lower_rank] as median_ci_low,
           g.sorted_values[r.upper_rank] as median_ci_high,
           row_number() over () as group_id
    from groups as g
    left join median_ci_rank as r on r.n = g.n
),
candidates as (
    select c.*, r.set_id, r.value_canonical, r.phantom as reference_phantom, r.phantom_stated,
           r.issuing_body, r.country, r.indication, r.population as ref_population, r.is_fallback,
           r.valid_to, r.verified, r.citation_title,
           case when r.indication is not null then coalesce(i.n_with_indication, 0) end
               as n_indication_matched,
           r.set_id is not null and (c.quantity <> 'ctdivol' or
               (coalesce(r.phantom_stated, false) and r.phantom = c.phantom)) as is_comparable
    from with_ci as c
    left join reference_in_force as r
      on r.exam_type = c.exam_type and r.quantity = c.quantity and r.population = c.population
     and c.population <> 'all'
     and (c.population <> 'paediatric'
          or (c.stratum_basis = 'age' and r.age_min_years = c.stratum_low
              and r.age_max_years is not distinct from c.stratum_high)
          or (c.stratum_basis = 'weight' and r.weight_min_kg = c.stratum_low
              and r.weight_max_kg is not distinct from c.stratum_high))
    left join indication_counts as i
      on i.indication = r.indication and i.device_key = c.device_key
     and i.exam_type = c.exam_type and i.quantity = c.quantity and i.population = c.population
     and i.site is not distinct from c.site and i.stratum is not distinct from c.stratum
     and i.phantom is not distinct from c.phantom
    qualify row_number() over (partition by c.group_id
                               order by is_comparable desc, r.precedence nulls last) = 1
),
noted as (
    select c.*,
           nullif(concat_ws('; ',
               case when c.set_id is null then
                   case c.population
                       when 'unknown_age' then 'patient age unknown: not compared with an adult or a paediatric level'
                       when 'all' then 'mammography: no reference level for this breast-thickness band in the chosen sets'
                       when 'paediatric' then 'no paediatric reference for this band in the chosen sets; compare with the network typical value (ICRP 135)'
                       else 'no reference level in the chosen sets; compare with the network typical value (ICRP 135)'
                   end
               end,
               case when c.set_id is not null and not c.is_comparable then
                   case when c.reference_phantom is null
                        then 'CTDIvol not compared: the reference states no phantom'
                        when not coalesce(c.phantom_stated, false)
                        then 'CTDIvol not compared: the reference phantom (' || c.reference_phantom
                             || ') is not stated in the retrieved source'
                        else 'CTDIvol not compared: reference phantom ' || c.reference_phantom
                             || ', this group ' || coalesce(c.phantom, 'unknown')
                   end
               end,
               case when c.is_comparable and c.indication is not null then
                   'the reference is defined for the clinical indication "' || c.indication
                   || '"; this group holds every study the exam rules map to ' || c.exam_type
                   || ' (' || c.n_indication_matched || ' of ' || c.n
                   || ' marked with that indication by the indication rules)'   -- network_reference.sql rewrites this count: keep the wording
               end,
               case when c.is_comparable and c.is_fallback then
                   'fallback: a set of ' || c.issuing_body || ' (' || coalesce(c.country, '?')
                   || '), not of the audit''s jurisdiction'
               end,
               case when c.is_comparable and c.valid_to is not null
                         and (case length(c.valid_to) when 4 then c.valid_to || '-12-31'
                                                     when 7 then c.valid_to || '-31'
                                                     else c.valid_to end) < strftime($date_from, '%Y-%m-%d')
                    then 'superseded: the set was in force until ' || c.valid_to
               end,
               case when c.is_comparable and not c.verified
                    then 'reference value not verified in its source (from memory)'
               end
           ), '') as reference_scope_note
    from candidates as c
)
select
    $period as period,
    c.site, c.device_key, c.exam_type, c.quantity, c.unit, c.population, c.stratum, c.phantom,
    c.n, c.median, c.p25, c.p75, c.median_ci_low, c.median_ci_high,
    c.n_standard_size, c.median_standard_size, c.n_with_weight, c.n_patients,
    m.min_sample,
    case when c.is_comparable then c.set_id end as reference_set,
    case when c.is_comparable then c.value_canonical end as reference_value,
    case when c.is_comparable then c.median / c.value_canonical end as ratio_to_reference,
    case when c.is_comparable then c.median_standard_size / c.value_canonical end
        as ratio_standard_size_to_reference,
    coalesce(c.is_comparable and c.median > c.value_canonical, false) as is_above_reference,
    coalesce(c.is_comparable and c.median < $low_fraction * c.value_canonical, false)
        as is_well_below_reference,
    c.n >= m.min_sample as is_sample_adequate,
    case when c.is_comparable then c.citation_title end as reference_citation,
    case when c.is_comparable then c.issuing_body end as reference_body,
    case when c.is_comparable then c.country end as reference_country,
    case when c.is_comparable then c.indication end as reference_indication,
    case when c.is_comparable then c.n_indication_matched end as n_indication_matched,
    case when c.is_comparable then c.ref_population end as reference_population,
    c.reference_scope_note,
    coalesce(c.is_comparable and c.is_fallback, false) as is_fallback_reference,
    null::varchar as change_month,          -- set by update_median_after_change (drift inside the period)
    null::double as median_after_change
from noted as c
left join min_sample_rule as m on m.modality = c.modality
order by c.exam_type, c.quantity, c.site, c.device_key, c.population, c.stratum

-- columns:
--   period: the audited period: YYYY-MM, or first..last day
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   device_key: the room (irradiating device)
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   quantity: audited quantity (as in audit_observation): dlp, ctdivol, dap, dose_rp,
--     fluoro_time, agd, ka_e or entrance_dose
--   unit: unit of value (and of the medians and reference values of the row), UCUM-like text: mGy,
--     mGy.cm, Gy.cm2, s, mSv
--   population: adult, paediatric, unknown_age (no age: never pooled with adults) or all
--     (mammography)
--   stratum: paediatric age or weight band, or mammography compressed-breast-thickness band; NULL
--     for adults
--   phantom: CTDIvol phantom of the group (head_16cm, body_32cm, mixed); NULL for other quantities
--   n: audited values in the group
--   median: median of the group's values (linear interpolation, Hyndman & Fan type 7) [unit column]
--   p25: 25th percentile [unit column]
--   p75: 75th percentile [unit column]
--   median_ci_low: lower end of the distribution-free 95 % interval of the median (binomial order
--     statistics) [unit column]
--   median_ci_high: upper end of that interval [unit column]
--   n_standard_size: values from standard-size patients (weight within the audit's standard range,
--     50-90 kg by default)
--   median_standard_size: median over the standard-size patients [unit column]
--   n_with_weight: values whose patient weight is known
--   n_patients: distinct pseudonymous patients in the group
--   min_sample: minimum sample size of the modality for a room median (ICRP 135)
--   reference_set: reference-level set compared with (NULL: not comparable)
--   reference_value: the reference value compared with, in the audit unit [unit column]
--   ratio_to_reference: median / reference_value
--   ratio_standard_size_to_reference: median_standard_size / reference_value
--   is_above_reference: the median exceeds the reference value (an investigation level, not a limit)
--   is_well_below_reference: the median is below the audit's low fraction of the reference value
--   is_sample_adequate: n reaches min_sample
--   reference_citation: title of the reference's source
--   reference_body: issuing body of the reference
--   reference_country: country of the issuing body
--   reference_indication: clinical indication the reference is defined for
--   n_indication_matched: values the indication rules mark with that indication
--   reference_population: population of the reference value
--   reference_scope_note: what else the reader must know about the comparison (indication, fallback,
--     phantom, why not compared)
--   is_fallback_reference: the reference is a fallback set, not of the audit's jurisdiction
--   change_month: month a drift flag found inside the period (YYYY-MM), else NULL
--   median_after_change: median of the values from change_month on [unit column]
--   item_id: stable finding id: the same finding next period has the same id (notes attach to it:
--     kerma note)
