-- grain: one row per flow run (Prefect flow run id); subflows have a parent_run_id
create table if not exists raw_pipeline_run (
    run_id varchar,
    parent_run_id varchar,
    flow varchar,              -- ingest | audit | publish | monthly
    period varchar,            -- YYYY-MM, or first..last day; NULL for ingest alone
    started_at timestamp,
    finished_at timestamp,
    state varchar,             -- RUNNING | COMPLETED | FAILED
    ingest_run_ids varchar,    -- raw_run.run_id of the ingest(s) this run made, '; '-separated
    n_files_loaded bigint,
    n_files_quarantined bigint,
    reference_sets varchar,    -- the sets the audit used, in order of precedence, '; '-separated
    detail varchar,            -- first line of the error of a failed run; output folder otherwise
    primary key (run_id)
);
