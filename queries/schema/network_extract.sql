-- grain: one row per site extract merged into this (network) warehouse by `kerma merge`; empty
-- in a site warehouse. Rows an extract brought carry its extract_id as run_id / first_run_id.
create table if not exists network_extract (
    extract_id varchar primary key,   -- SHA-256 (32 hex) of site, period, key fingerprint, files
    site varchar not null,
    date_from date not null,
    date_to date not null,            -- last study day of the extract
    schema_version bigint not null,
    pseudonym_scheme varchar not null,
    key_scope varchar not null,       -- network (shared key: patients link across sites) | site
    key_fingerprint varchar not null, -- pipeline.pseudonym.key_fingerprint, never the key
    n_studies bigint not null,
    n_dose_objects bigint not null,
    n_events bigint not null,
    created_at varchar,               -- as the extract's manifest states
    kerma_version varchar,
    merged_at timestamp not null
)
