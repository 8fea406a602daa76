-- grain: one row: the headline counts of the audit period (each links to its page); files are
-- those of the period (dash_period_file, made by dash_period_files.sql: a row per file not
-- loaded, a row per reason of the loaded ones with their n_files)
with
period_studies as (
    -- one row per study of the period: its flags over its devices' rows (one grouping, not
    -- three distinct counts of the study keys; at 10M events 2.2 -> 1.1 CPU-s, measured)
    select study_key,
           bool_or(exam_type is null) as has_unmapped,
           bool_or(patient_weight_kg is not null) as has_weight
    from study_dose
    where study_date >= $date_from and study_date < $date_to
    group by study_key
),
period_places as (
    select count(distinct device_key) as n_devices, count(distinct coalesce(site, '')) as n_sites
    from study_dose
    where study_date >= $date_from and study_date < $date_to
),
study_counts as (
    select count(*) as n_studies, count(*) filter (where has_unmapped) as n_unmapped,
           count(*) filter (where has_weight) as n_with_weight
    from period_studies
)
select
    (select n_studies from study_counts) as n_studies,
    (select n_devices from period_places) as n_devices,
    (select n_sites from period_places) as n_sites,
    (select n_unmapped from study_counts) as n_unmapped,
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
