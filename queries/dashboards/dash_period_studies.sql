-- grain: one row per device x modality x flags (weight, height, age recorded) counting the
-- studies of the period that have one row of study_dose (is_study_row false, n_studies the
-- count), and one row per row of study_dose in the period of a study with rows on several
-- devices (is_study_row, its study_key, n_studies 1; rare: the SELECTs that read these group
-- them by study). A
-- temporary table read by the SELECTs that count the period's studies (overview, weight share,
-- device studies), dropped by dash_drop_materialised.sql. Read from the kept totals
-- (derived_study_total: study_dose's rows, whose study date, device, modality and patient
-- values are theirs), the studies of several rows found once, not copied whole and grouped by
-- study in each SELECT; the exam types are dash_period_unmapped.sql's.
create temp table dash_period_study as
with
period_rows as not materialized (
    select study_key, device_key, modality,
           patient_weight_kg is not null as has_weight,
           patient_height_m is not null as has_height,
           patient_age_years is not null as has_age
    from derived_study_total
    where study_date >= $date_from and study_date < $date_to
),
shared_hashes as (
    -- hashes of study keys on several rows: every study with rows on several devices is among
    -- them (and a study whose key's hash another shares, found out below); grouping the 64-bit
    -- hashes, not the keys, of every study (10M events: 0.8 -> 0.5 CPU-s for the table, no
    -- spilling at 256 MB; measured, no other source)
    select hash(study_key) as study_hash
    from period_rows
    group by study_hash
    having count(*) > 1
),
several as (
    -- the period's studies with rows on several devices
    select p.study_key
    from period_rows as p
    semi join shared_hashes as h on h.study_hash = hash(p.study_key)
    group by p.study_key
    having count(*) > 1
)
select device_key, modality, has_weight, has_height, has_age, null::varchar as study_key,
       false as is_study_row, count(*)::bigint as n_studies
from period_rows
anti join several using (study_key)
where study_key is not null
group by device_key, modality, has_weight, has_height, has_age
union all
select device_key, modality, has_weight, has_height, has_age, study_key,
       true as is_study_row, 1::bigint as n_studies
from period_rows
semi join several using (study_key)
union all
-- rows with no study key (none in practice) are listed too: study_dose's SELECTs group them
-- as one study, as a GROUP BY does, and leave them out of their distinct counts
select device_key, modality, has_weight, has_height, has_age, study_key,
       true as is_study_row, 1::bigint as n_studies
from period_rows
where study_key is null
