-- grain: one row per alert rule in force (defaults overridden by kerma.toml)
create or replace temp table alert_rule_in_force as select * from incoming_alert_rule_in_force
