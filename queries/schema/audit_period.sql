-- grain: one row per audit run of a period (a period audited with no finding still has its row)
-- inputs_fingerprint: digest of what the run read (data, reference levels, rules, settings, code),
-- set when the run completed; NULL for an unfinished run or one recorded before it existed
create table if not exists audit_period (
    period varchar not null,
    date_from date not null,
    date_to date not null,            -- last day of the period
    period_length varchar not null,
    n_findings bigint not null,
    audited_at timestamp not null,
    inputs_fingerprint varchar
);
alter table audit_period add column if not exists inputs_fingerprint varchar;

-- columns:
--   period: the audited period label
--   date_from: first day of the period
--   date_to: last day of the period
--   period_length: '1 month', '3 months' or 'N days'
--   n_findings: findings recorded for the period
--   audited_at: when the audit ran (UTC)
--   inputs_fingerprint: fingerprint of the audit's inputs (loaded data, reference levels, rules,
--     settings, code) when the run completed; NULL for a run cut short. Equal: the audit is current
