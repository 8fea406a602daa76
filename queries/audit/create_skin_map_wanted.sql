-- grain: one row per study x device of the period whose peak skin dose reaches the audit's map
-- threshold but lies below derived_skin_dose_map's floor: its map is computed by the audit
create or replace temp table skin_map_wanted as
select study_key, device_key from skin_dose
where psd_mgy >= $threshold and psd_mgy < $floor
