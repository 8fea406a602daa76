-- grain: one row per audited value (audit_observation, with the clinical indication an indication
-- rule gives the study): this warehouse has no entrance-dose column, so no radiograph has an
-- entrance surface dose (quantity ka_e) to compare
create or replace temp view audit_input as
select o.*, i.indication
from audit_observation as o
left join study_indication as i using (study_key, device_key)
