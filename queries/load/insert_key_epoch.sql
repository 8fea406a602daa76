-- grain: one new key epoch ($epoch, $key_fingerprint, $started_at, $first_run_id)
insert into raw_key_epoch (epoch, key_fingerprint, started_at, first_run_id)
values ($epoch, $key_fingerprint, $started_at, $first_run_id)
