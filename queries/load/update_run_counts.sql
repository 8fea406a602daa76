-- load: final counts of one run
update raw_run set
    finished_at = $finished_at,
    n_seen = $n_seen, n_loaded = $n_loaded, n_duplicate = $n_duplicate,
    n_not_dose = $n_not_dose, n_quarantined = $n_quarantined, n_unchanged = $n_unchanged
where run_id = $run_id
