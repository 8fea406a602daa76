-- grain: one row per audited value: audit_observation (with the clinical indication an
-- indication rule gives the study), plus one ka_e row per radiograph whose room reports an
-- entrance surface dose (irradiation_event.entrance_dose_mgy). An entrance-surface reference is
-- compared only with this quantity, never with Ka,r (dose_rp) or DAP.
create or replace temp view audit_input as
with
observed as (
    select o.*, i.indication
    from audit_observation as o
    left join study_indication as i using (study_key, device_key)
)
select * from observed
union all by name
select o.* replace ('ka_e' as quantity, 'mGy' as unit, e.entrance_dose_mgy as value)
from observed as o
join irradiation_event as e on e.event_uid = o.event_uid and e.study_key = o.study_key
where o.modality in ('DX', 'CR') and o.quantity = 'dap' and e.entrance_dose_mgy is not null
