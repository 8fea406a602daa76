-- grain: one row: the last audit run of the period [$date_from, $date_to] (none: never audited)
select period, audited_at, n_findings
from audit_period
where date_from = $date_from and date_to = $date_to
order by audited_at desc
limit 1
