-- grain: one row: the headline counts of the audit period (each links to its page); studies are
-- those of the period (dash_period_study and dash_period_unmapped, made by
-- dash_period_studies.sql and dash_period_unmapped.sql), files those of the
-- period (dash_period_file, made by dash_period_files.sql: a row per file not loaded, a row per
-- reason of the loaded ones with their n_files)
with
period_studies as (
    -- one row per study of the period, or per count of them (dash_period_study, made by
    -- dash_period_studies.sql: the studies of one row counted per device and flags, the rows
    -- of the others grouped here by study, their flags over their devices' rows)
    select n_studies, has_weight
    from dash_period_study
    where not is_study_row
    union all
    select 1, bool_or(has_weight)
    from dash_period_study
    where is_study_row
    group by study_key
),
period_places as (
    -- the devices of the period's studies and their sites (the view device, as study_dose)
    select count(p.device_key) as n_devices, count(distinct coalesce(v.site, '')) as n_sites
    from (select distinct device_key from dash_period_study) as p
    left join device as v on v.device_key = p.device_key
),
study_counts as (
    select coalesce(sum(n_studies), 0)::bigint as n_studies,
           coalesce(sum(n_studies) filter (where has_weight), 0)::bigint as n_with_weight
    from period_studies
)
select
    (select n_studies from study_counts) as n_studies,
    (select n_devices from period_places) as n_devices,
    (select n_sites from period_places) as n_sites,
    -- the studies with a row of no exam type (the rows with no study key, if any, are one)
    (select count(distinct study_key) + (count(*) > count(study_key))::int
       from dash_period_unmapped) as n_unmapped,
    (select n_with_weight from study_counts) as n_with_weight,
    (select count(distinct exam_type) from audit_medians) as n_exam_types,
    (select count(distinct exam_type) filter (where reference_value is not null)
       from audit_medians) as n_exam_types_with_reference,
    (select count(distinct exam_type) filter (where is_above_reference)
       from audit_medians) as n_exam_types_above,
    (select count(*) from audit_medians) as n_groups,
    (select count(*) filter (where reference_value is not null) from audit_medians)
        as n_groups_with_reference,
    (select count(*) filter (where is_above_reference) from audit_medians) as n_groups_above,
    (select count(*) filter (where is_above_reference and is_sample_adequate) from audit_medians)
        as n_groups_above_adequate,
    (select count(*) from dose_alerts) as n_alerts,
    (select count(distinct study_key) from dose_alerts) as n_alert_studies,
    (select count(*) from drift_flags) as n_drift_flags,
    (select coalesce(sum(n_files), 0)::bigint from dash_period_file) as n_files,
    (select coalesce(sum(n_files) filter (where status = 'quarantined'), 0)::bigint
       from dash_period_file) as n_quarantined,
    (select coalesce(sum(n_files) filter (where status = 'not_dose'), 0)::bigint
       from dash_period_file) as n_not_dose
