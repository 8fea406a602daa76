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

-- columns:
--   extract_id: SHA-256 (first 32 hex) of site, period, key fingerprint and files of the extract
--   site: the site the extract comes from
--   date_from: first study day of the extract
--   date_to: last study day of the extract
--   schema_version: version of the extract layout (a merge refuses any other)
--   pseudonym_scheme: how the pseudonyms were made (kerma-hmac-sha256-v1)
--   key_scope: network (shared key: patients link across sites) or site (the site's own key)
--   key_fingerprint: fingerprint of the pseudonymisation key (never the key)
--   n_studies: studies in the extract
--   n_dose_objects: dose objects in the extract
--   n_events: irradiation events in the extract
--   created_at: when the extract was written, as its manifest states
--   kerma_version: version of Kerma Ledger that wrote the extract
--   merged_at: when the extract was merged into this warehouse
