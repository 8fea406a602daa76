-- grain: one row per unique irradiation event (event_uid), deduplicated across reports; public interface
-- source_kind: rdsr (dose report), dose_screen (Exposure Dose Sequence of an image object) or
-- image_header. dose_rp_mgy is Dose (RP), the reference-point air kerma of a dose report only;
-- entrance_dose_mgy is the image header's Entrance Dose (0040,8302) in mGy, else 100 x (0040,0302)
-- in dGy: a dose at the patient's entrance surface, a different quantity, never pooled with it;
-- entrance_dose_derivation is its (0040,8303): only ESAK is the entrance surface air kerma Ka,e.
-- Projection geometry (TID 10003B/C): positioner angles in degrees (PS3.3 C.8.7.5 signs),
-- distances in mm, table positions in mm from a device-specific origin (signed),
-- collimated_field_area_m2 as reported (or Height x Width), reference_point_definition per event;
-- patient_orientation / _modifier / patient_table_relationship: TID 10003 CID 19 / 20 / 21 terms
-- (recumbent, supine, prone, headfirst, feet-first, ...) as the event reports them, else null.
create or replace view irradiation_event as
select
    event_uid, study_key, device_key, modality, source_kind, sop_instance_uid,
    ct_acquisition_type as event_type, null::varchar as acquisition_plane, started_at,
    acquisition_protocol, target_region, kvp, tube_current_ma, exposure_time_s,
    null::double as dap_gy_cm2, null::double as dose_rp_mgy, ctdivol_mgy, dlp_mgy_cm,
    ctdi_phantom, scanning_length_mm, pitch_factor,
    null::double as agd_mgy, null::double as compressed_breast_thickness_mm,
    null::double as irradiation_duration_s, null::varchar as laterality,
    nominal_total_collimation_mm, ssde_mgy, water_equivalent_diameter_mm,
    null::double as entrance_dose_mgy, null::varchar as entrance_dose_derivation,
    top_z_scanning_length_mm, bottom_z_scanning_length_mm,
    null::double as positioner_primary_angle_deg, null::double as positioner_secondary_angle_deg,
    null::double as distance_source_to_isocenter_mm, null::double as distance_source_to_detector_mm,
    null::double as distance_source_to_rp_mm,
    null::double as table_longitudinal_mm, null::double as table_lateral_mm,
    null::double as table_height_mm, null::double as collimated_field_area_m2,
    null::varchar as filter_material, null::double as filter_thickness_mm,
    null::varchar as reference_point_definition,
    null::varchar as patient_orientation, null::varchar as patient_orientation_modifier,
    null::varchar as patient_table_relationship
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
    null::double as water_equivalent_diameter_mm,
    entrance_dose_mgy, entrance_dose_derivation,
    null::double as top_z_scanning_length_mm, null::double as bottom_z_scanning_length_mm,
    positioner_primary_angle_deg, positioner_secondary_angle_deg,
    source_to_isocenter_mm as distance_source_to_isocenter_mm,
    source_to_detector_mm as distance_source_to_detector_mm,
    distance_source_to_rp_mm,
    table_longitudinal_mm, table_lateral_mm, table_height_mm,
    collimated_field_area_cm2 / 1e4 as collimated_field_area_m2,
    filter_material, filter_thickness_mm, reference_point_definition,
    patient_orientation, patient_orientation_modifier, patient_table_relationship
from stg_projection_event

-- columns:
--   event_uid: Irradiation Event UID (0008,3010) of the event (NULL for a study total)
--   study_key: pseudonymous study key: keyed HMAC-SHA256 of the Study Instance UID (128 bits, hex)
--   device_key: key of the irradiating device: a hash of manufacturer, model and serial number;
--     else of the Device Observer UID; else of the equipment module
--   modality: irradiating modality: CT, DX, CR, RF, XA or MG
--   source_kind: rdsr (dose report), dose_screen (Exposure Dose Sequence of an image object) or
--     image_header
--   sop_instance_uid: SOP Instance UID (0008,0018) of the DICOM object
--   event_type: CT Acquisition Type (spiral, sequenced, stationary, constant_angle ...) or
--     projection Irradiation Event Type (stationary, fluoroscopy, rotational ...)
--   acquisition_plane: Acquisition Plane of a projection event: single, A or B (biplane), other
--   started_at: DateTime Started of the event (local time of the device)
--   acquisition_protocol: Acquisition Protocol text as sent
--   target_region: Target Region (anatomy) meaning as sent
--   kvp: X-ray tube peak voltage (KVP)
--   tube_current_ma: X-ray tube current
--   exposure_time_s: exposure time of the event
--   dap_gy_cm2: dose-area product of the event
--   dose_rp_mgy: Dose (RP): reference-point air kerma Ka,r of a dose report
--   ctdivol_mgy: Mean CTDIvol of a CT event
--   dlp_mgy_cm: dose-length product of a CT event
--   ctdi_phantom: CTDIvol phantom: head_16cm or body_32cm
--   scanning_length_mm: CT scanning length
--   pitch_factor: CT pitch factor (table feed per rotation / nominal total collimation),
--     dimensionless
--   agd_mgy: average glandular dose of a mammographic view
--   compressed_breast_thickness_mm: compressed breast thickness of a mammographic view
--   irradiation_duration_s: irradiation duration of a projection event (fluoroscopy time of a
--     fluoroscopy event)
--   laterality: laterality of a mammographic view: L or R
--   nominal_total_collimation_mm: CT nominal total collimation width
--   ssde_mgy: size-specific dose estimate as reported by the device
--   water_equivalent_diameter_mm: water-equivalent diameter as reported by the device (AAPM Report
--     220)
--   entrance_dose_mgy: image header Entrance Dose (0040,8302), else 100 x (0040,0302) in dGy: a
--     surface dose, not Ka,r
--   entrance_dose_derivation: Entrance Dose Derivation (0040,8303): IAK, ESAK (entrance surface air
--     kerma Ka,e), ESDBS or ESDNOBS
--   top_z_scanning_length_mm: CT table position at the top of the scanning length (TID 10014)
--   bottom_z_scanning_length_mm: CT table position at the bottom of the scanning length (TID 10014)
--   positioner_primary_angle_deg: Positioner Primary Angle (PS3.3 C.8.7.5 signs)
--   positioner_secondary_angle_deg: Positioner Secondary Angle (PS3.3 C.8.7.5 signs)
--   distance_source_to_isocenter_mm: distance source to isocenter
--   distance_source_to_detector_mm: distance source to detector
--   distance_source_to_rp_mm: distance source to the reference point, where the report gives it
--   table_longitudinal_mm: table longitudinal position, from a device-specific origin (signed)
--   table_lateral_mm: table lateral position, from a device-specific origin (signed)
--   table_height_mm: table height position, from a device-specific origin (signed)
--   collimated_field_area_m2: collimated field area as reported (or Height x Width)
--   filter_material: X-ray filter material as sent
--   filter_thickness_mm: X-ray filter thickness
--   reference_point_definition: Reference Point Definition of the event (e.g. 15 cm from the
--     isocentre towards the source)
--   patient_orientation: Patient Orientation (TID 10003, CID 19: e.g. erect, recumbent) as sent
--   patient_orientation_modifier: Patient Orientation Modifier (CID 20: e.g. supine, prone) as sent
--   patient_table_relationship: Patient Table Relationship (CID 21: headfirst or feet-first) as sent
