-- grain: one row: the period of the last audit run (the one whose tables the warehouse holds)
select period, date_from, date_to, period_length
from audit_period
order by audited_at desc
limit 1
