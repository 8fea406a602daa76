-- grain: one row per device x exam type x quantity with a change point (drift_flags); item_id:
-- the series' identity and the period length, so the same drift flagged next month keeps its id
alter table drift_flags add column if not exists item_id varchar;
update drift_flags set item_id = 'D' || substr(sha256(concat_ws('|', 'drift_flags',
    coalesce(device_key, '-'), coalesce(exam_type, '-'), quantity, $period_length)), 1, 12);
