-- grain: one row per audit run (audit_period): records the fingerprint of the run's inputs once the run is complete
update audit_period set inputs_fingerprint = $fingerprint
where date_from = $date_from::date and date_to = $date_last::date and audited_at = $recorded_at::timestamp
