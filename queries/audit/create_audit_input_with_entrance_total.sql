-- grain: one row per audited value: audit_observation (with the clinical indication an
-- indication rule gives the study), plus one ka_e row per radiograph of a ONE-radiograph study
-- whose room reports an entrance surface dose total (study_dose.entrance_dose_total_mgy): a
-- study total is a per-radiograph value only when the study has one radiograph. Used when the
-- warehouse has the study total but no per-event entrance dose. Never Ka,r (dose_rp) or DAP.
create or replace temp view audit_input as
with
observed as (
    select o.*, i.indication
    from audit_observation as o
    left join study_indication as i using (study_key, device_key)
)
select * from observed
union all by name
select o.* replace ('ka_e' as quantity, 'mGy' as unit, s.entrance_dose_total_mgy as value)
from observed as o
join study_dose as s using (study_key, device_key)
where o.modality in ('DX', 'CR') and o.quantity = 'dap' and s.event_count = 1
  and s.entrance_dose_total_mgy is not null
