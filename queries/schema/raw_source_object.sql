-- grain: one row per input file and content (path + sha256); a rerun over the same file adds nothing
create table if not exists raw_source_object (
    path varchar,
    sha256 varchar,
    size_bytes bigint,
    sop_instance_uid varchar,
    sop_class_uid varchar,
    status varchar,            -- loaded | duplicate | not_dose | quarantined
    reason varchar,            -- short code; NULL for a plain load
    detail varchar,            -- the full message
    run_id varchar,
    recorded_at timestamp,
    primary key (path, sha256)
);
