-- grain: one row per audited period x finding (item_id); written by each audit run for its period,
-- read to tell new / persisting / resolved findings against the previous period of the same length
create table if not exists audit_finding (
    period varchar not null,
    date_from date not null,
    date_to date not null,            -- last day of the period
    period_length varchar not null,   -- '1 month', '3 months' or 'N days'
    item_id varchar not null,
    source_table varchar not null,    -- audit_medians | dose_alerts | drift_flags
    action varchar not null,          -- patient_follow_up | protocol_review | statistical_review
    rule varchar not null,
    subject varchar,                  -- study pseudonym, or the room (device key)
    site varchar,
    exam_type varchar,
    quantity varchar,
    value double,
    threshold double,
    unit varchar,
    recorded_at timestamp not null,
    primary key (date_from, date_to, item_id, rule)
);

-- columns:
--   period: the audited period label
--   date_from: first day of the period
--   date_to: last day of the period
--   period_length: '1 month', '3 months' or 'N days'
--   item_id: stable finding id: the same finding next period has the same id (notes attach to it:
--     kerma note)
--   source_table: audit_medians, dose_alerts or drift_flags
--   action: patient_follow_up, protocol_review or statistical_review
--   rule: the rule or finding kind
--   subject: study pseudonym, or the room (device key)
--   site: site of the device: from kerma.toml [sites], else the Institution Name the device reports
--   exam_type: standard exam type the exam rules map the study to (NULL: unmapped)
--   quantity: dose quantity: dlp, ctdivol, dap, dose_rp, fluoro_time, agd, ka_e, entrance_dose,
--     effective_dose or peak_skin_dose
--   value: the finding's value [unit column]
--   threshold: its threshold or reference value [unit column]
--   unit: unit of value and threshold
--   recorded_at: when the audit recorded it (UTC)
