-- grain: one row per phrase of an indication rule in force (rule_id: precedence, lower wins)
create or replace temp table indication_rule as select * from incoming_indication_rule
