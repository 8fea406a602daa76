-- grain: one row per unique irradiation event (event_uid), deduplicated across reports; public interface
create or replace view irradiation_event as
select
    event_uid, study_key, device_key, modality, source_kind, sop_instance_uid,
    ct_acquisition_type as event_type, null::varchar as acquisition_plane, started_at,
    acquisition_protocol, target_region, kvp, tube_current_ma, exposure_time_s,
    null::double as dap_gy_cm2, null::double as dose_rp_mgy, ctdivol_mgy, dlp_mgy_cm,
    ctdi_phantom, scanning_length_mm, pitch_factor,
    null::double as agd_mgy, null::double as compressed_breast_thickness_mm,
    null::double as irradiation_duration_s, null::varchar as laterality,
    nominal_total_collimation_mm, ssde_mgy, water_equivalent_diameter_mm
from stg_ct_event
union all by name
select
    event_uid, study_key, device_key, modality, source_kind, sop_instance_uid,
    event_type, acquisition_plane, started_at,
    acquisition_protocol, target_region, kvp, tube_current_ma, exposure_time_s,
    dap_gy_cm2, dose_rp_mgy, null::double as ctdivol_mgy, null::double as dlp_mgy_cm,
    null::varchar as ctdi_phantom, null::double as scanning_length_mm, null::double as pitch_factor,
    agd_mgy, compressed_breast_thickness_mm, irradiation_duration_s, laterality,
    null::double as nominal_total_collimation_mm, null::double as ssde_mgy,
    null::double as water_equivalent_diameter_mm
from stg_projection_event
