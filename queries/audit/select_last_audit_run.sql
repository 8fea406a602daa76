-- grain: one row per audit run recorded with its inputs: the latest run (of any period, or of the period asked for)
select period, date_from, date_to, inputs_fingerprint
from audit_period
where inputs_fingerprint is not null
  and ($date_from::date is null or (date_from = $date_from::date and date_to = $date_last::date))
order by audited_at desc
limit 1
