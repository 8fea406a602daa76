-- grain: one row if the item_id names a finding of any audited period, or a current audit row
select exists (select 1 from audit_finding where item_id = $item_id)
    or exists (select 1 from audit_medians where item_id = $item_id)
    or exists (select 1 from dose_alerts where item_id = $item_id)
    or exists (select 1 from drift_flags where item_id = $item_id) as is_known;
