-- grain: one row per audited value (audit_observation): this warehouse has no entrance-dose
-- column, so no radiograph has an entrance surface dose (quantity ka_e) to compare
create or replace temp view audit_input as select * from audit_observation
