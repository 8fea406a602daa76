-- grain: one row per study x rule (dose_alerts); item_id: rule, quantity and the study (the
-- pseudonymous patient for a cumulative rule, whose reporting study changes from period to period)
alter table dose_alerts add column if not exists item_id varchar;
update dose_alerts set item_id = 'A' || substr(sha256(concat_ws('|', 'dose_alerts', rule,
    quantity, case when family = 'cumulative_effective_dose' then 'patient:' || patient_key
                   else 'study:' || study_key end)), 1, 12);
