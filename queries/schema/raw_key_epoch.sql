-- grain: one row per pseudonymisation-key epoch of this warehouse (a fingerprint, never the key)
-- key_fingerprint: first 16 hex characters of HMAC-SHA256(key, fixed label) (pipeline.pseudonym);
-- a new epoch starts only with `kerma ingest --new-key-epoch`: patients are not linked across epochs.
create table if not exists raw_key_epoch (
    epoch bigint,
    key_fingerprint varchar not null,
    started_at timestamp not null,
    first_run_id varchar,
    primary key (epoch)
);
