-- grain: one row per audit group (audit_medians); item_id: the group's identity without its period
-- The same room, exam type, quantity, population, stratum and phantom audited over a period of
-- the same length (e.g. '1 month') gets the same item_id next period (sha256, first 12 hex).
alter table audit_medians add column if not exists item_id varchar;
update audit_medians set item_id = 'M' || substr(sha256(concat_ws('|', 'audit_medians',
    coalesce(site, '-'), coalesce(device_key, '-'), coalesce(exam_type, '-'), quantity,
    population, coalesce(stratum, '-'), coalesce(phantom, '-'), $period_length)), 1, 12);
