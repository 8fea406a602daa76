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
