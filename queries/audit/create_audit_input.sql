-- grain: one row per audited value (audit_observation, with the clinical indication an indication
-- rule gives the study). Entrance doses arrive there already apart: an image-header Entrance Dose
-- derived as ESAK (entrance surface air kerma) is quantity ka_e, any other derivation is
-- entrance_dose (no reference of its own); neither is ever compared as Ka,r (dose_rp) or DAP.
create or replace temp view audit_input as
select o.*, i.indication
from audit_observation as o
left join study_indication as i using (study_key, device_key)
