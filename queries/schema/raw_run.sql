-- grain: one row per ingest run
create table if not exists raw_run (
    run_id varchar,
    started_at timestamp,
    finished_at timestamp,
    kerma_version varchar,
    inputs varchar,
    workers bigint,
    n_seen bigint,
    n_loaded bigint,
    n_duplicate bigint,
    n_not_dose bigint,
    n_quarantined bigint,
    n_unchanged bigint,
    primary key (run_id)
);
