-- grain: one row per configured device -> site assignment (from kerma.toml [sites]); replaced on each run
create table if not exists raw_site_map (
    match_value varchar,       -- a Device Observer UID, device key or Station Name
    site varchar,
    primary key (match_value)
);
