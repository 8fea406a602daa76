-- grain: one row per value-level issue (the value itself is stored as NULL, never guessed)
create table if not exists raw_value_issue (
    issue_id varchar,
    sop_instance_uid varchar,
    event_uid varchar,
    kind varchar,
    concept_code varchar,      -- scheme:value of the concept, e.g. DCM:113838
    detail varchar,
    raw_value varchar,
    raw_unit varchar,
    run_id varchar,
    primary key (issue_id)
);
