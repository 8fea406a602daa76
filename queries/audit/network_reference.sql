-- grain: one row per exam type x quantity x population x stratum (x phantom) across the network in the period
-- ICRP Publication 135: typical value = median of the room medians; a local DRL = 75th
-- percentile of the room medians, set only from a reasonable number of rooms
-- ($min_rooms, default 10). With fewer rooms, is_local_drl is false and local_drl NULL: only the
-- typical value is a comparator (p75_of_room_medians stays, descriptive). Only rooms with an
-- adequate sample count (n_rooms); n_rooms_all counts every room with data.
create or replace table network_reference as
select
    $period as period, exam_type, quantity, unit, population, stratum, phantom,
    count(*) filter (where is_sample_adequate) as n_rooms,
    count(*) as n_rooms_all,
    count(distinct site) filter (where is_sample_adequate) as n_sites,
    sum(n) as n_exams,
    quantile_cont(median, 0.5) filter (where is_sample_adequate) as typical_value,
    quantile_cont(median, 0.75) filter (where is_sample_adequate) as p75_of_room_medians,
    $min_rooms as min_rooms_local_drl,
    count(*) filter (where is_sample_adequate) >= $min_rooms as is_local_drl,
    case when count(*) filter (where is_sample_adequate) >= $min_rooms
         then quantile_cont(median, 0.75) filter (where is_sample_adequate) end as local_drl,
    any_value(reference_set) as reference_set,
    any_value(reference_value) as reference_value,
    any_value(reference_body) as reference_body,
    any_value(reference_country) as reference_country,
    any_value(reference_indication) as reference_indication,
    any_value(reference_population) as reference_population,
    -- the scope note of the network's group (not of one room: the room's indication count is
    -- replaced by the network's), the same whatever the order of audit_medians' rows
    regexp_replace(arg_min(reference_scope_note, device_key),
                   '\(\d+ of \d+ marked with that indication by the indication rules\)',
                   '(' || coalesce(sum(n_indication_matched), 0) || ' of ' || sum(n)
                       || ' marked with that indication by the indication rules)')
        as reference_scope_note
from audit_medians
group by period, exam_type, quantity, unit, population, stratum, phantom
order by exam_type, quantity, population, stratum

-- columns:
--   period: the audited period: YYYY-MM, or first..last day
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
--   n_rooms: rooms with an adequate sample
--   n_rooms_all: rooms with any data
--   n_sites: sites of the rooms with an adequate sample
--   n_exams: audited values over all rooms
--   typical_value: median of the room medians (ICRP 135 typical value) [unit column]
--   p75_of_room_medians: 75th percentile of the room medians (descriptive) [unit column]
--   min_rooms_local_drl: rooms needed to set a local DRL
--   is_local_drl: enough rooms for a local DRL
--   local_drl: local diagnostic reference level: 75th percentile of the room medians, only with
--     enough rooms [unit column]
--   reference_set: reference-level set compared with
--   reference_value: national reference value [unit column]
--   reference_body: issuing body of the reference
--   reference_country: country of the issuing body
--   reference_indication: clinical indication the reference is defined for
--   reference_population: population of the reference value
--   reference_scope_note: what else the reader must know about the comparison
