-- grain: one row per flow run (ingest, audit, publish, monthly); public interface
create or replace view pipeline_run as
with
source as (select * from raw_pipeline_run),
renamed as (
    select
        -- ids
        run_id,
        parent_run_id,
        flow,
        period,
        -- timestamps
        started_at,
        finished_at,
        -- outcome
        state,
        n_files_loaded,
        n_files_quarantined,
        reference_sets,
        ingest_run_ids,
        detail
    from source
)
select * from renamed

-- columns:
--   run_id: Prefect flow run id
--   parent_run_id: run id of the parent flow (subflows of the monthly run)
--   flow: ingest, audit, publish or monthly
--   period: YYYY-MM or first..last day; NULL for an ingest alone
--   started_at: start (local time of the machine that ran it)
--   finished_at: end (local time); NULL while running
--   state: RUNNING, COMPLETED or FAILED
--   n_files_loaded: files loaded by the run's ingest
--   n_files_quarantined: files quarantined by the run's ingest
--   reference_sets: reference sets the audit used, in order of precedence, '; '-separated
--   ingest_run_ids: raw ingest run ids this run made, '; '-separated
--   detail: first line of the error of a failed run; the output folder otherwise
