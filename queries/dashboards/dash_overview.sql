-- grain: one row: the headline counts of the audit period (each links to its page); files are
-- those of the period (dash_period_file, the frame of dash_period_files.sql)
select
    (select count(distinct study_key) from study_dose
      where study_date >= $date_from and study_date < $date_to) as n_studies,
    (select count(distinct device_key) from study_dose
      where study_date >= $date_from and study_date < $date_to) as n_devices,
    (select count(distinct coalesce(site, '')) from study_dose
      where study_date >= $date_from and study_date < $date_to) as n_sites,
    (select count(distinct study_key) filter (where exam_type is null) from study_dose
      where study_date >= $date_from and study_date < $date_to) as n_unmapped,
    (select count(distinct study_key) filter (where patient_weight_kg is not null) from study_dose
      where study_date >= $date_from and study_date < $date_to) as n_with_weight,
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
    (select count(*) from dash_period_file) as n_files,
    (select count(*) filter (where status = 'quarantined') from dash_period_file) as n_quarantined,
    (select count(*) filter (where status = 'not_dose') from dash_period_file) as n_not_dose
