-- grain: one row per finding (item_id x rule) recorded for the audited period [$date_from, $date_to] (last day inclusive)
select item_id, source_table, action, rule, subject, site, exam_type, quantity, value,
       threshold, unit, period
from audit_finding
where date_from = $date_from and date_to = $date_to
order by action, subject, rule
