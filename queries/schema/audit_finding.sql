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
