-- grain: one row per alert rule that fired
select rule, count(*) from dose_alerts group by rule order by rule
