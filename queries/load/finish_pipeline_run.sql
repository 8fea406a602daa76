-- load: a flow run ends: its state and what it did
update raw_pipeline_run set
    finished_at = $finished_at,
    state = $state,
    ingest_run_ids = $ingest_run_ids,
    n_files_loaded = $n_files_loaded,
    n_files_quarantined = $n_files_quarantined,
    reference_sets = $reference_sets,
    detail = $detail
where run_id = $run_id
