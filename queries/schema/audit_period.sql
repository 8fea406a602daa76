-- grain: one row per audit run of a period (a period audited with no finding still has its row)
create table if not exists audit_period (
    period varchar not null,
    date_from date not null,
    date_to date not null,            -- last day of the period
    period_length varchar not null,
    n_findings bigint not null,
    audited_at timestamp not null
);
