-- grain: one row per CT series (study, device, series) of a study known only from image headers
-- A header-only CT study (no dose report, no dose screen of its modality) has per-image CTDIvol
-- and image positions but no DLP. Per series: ctdivol_max_mgy (the highest image value) and
-- ctdivol_mean_mgy (mean over its images, each enhanced frame counted); covered_length_mm =
-- (highest - lowest image z) + slice thickness; dlp_estimate_mgy_cm = ctdivol_mean_mgy x
-- covered length in cm. The imaged range is shorter than the irradiated one (over-ranging,
-- helical run-in), so the estimate is a lower bound of the scanner's DLP.
-- is_localizer: Image Type LOCALIZER or a constant-angle acquisition (not a CT dose series).
-- is_reconstruction: a series lying within another series' z range (5 mm tolerance) with the
-- same CTDIvol (1 %) is another reconstruction of the same irradiation, counted once.
create or replace view stg_ct_image_series as
with
other_source as (
    -- studies x modality with an object other than image headers (a report or a dose screen)
    select distinct study_key, modality
    from raw_dose_object
    where object_kind <> 'image_header'
),
images as (
    select e.*, o.modality
    from raw_ct_event as e
    join raw_dose_object as o using (sop_instance_uid)
    anti join other_source as r on r.study_key = e.study_key and r.modality = o.modality
    where e.source_kind = 'image_header'
),
series as (
    select study_key, device_key,
           coalesce(series_instance_uid, event_uid) as series_key,
           max(ctdivol_mgy) as ctdivol_max_mgy,
           sum(ctdivol_mgy * coalesce(n_images, 1))
               / nullif(sum(coalesce(n_images, 1)) filter (where ctdivol_mgy is not null), 0)
               as ctdivol_mean_mgy,
           min(image_z_min_mm) as z_min_mm,
           max(image_z_max_mm) as z_max_mm,
           median(slice_thickness_mm) as slice_thickness_mm,
           sum(coalesce(n_images, 1)) as n_images,
           coalesce(bool_or(ct_acquisition_type in ('constant_angle', 'stationary')), false)
               as is_localizer
    from images
    group by all
),
measured as (
    select *,
           case when z_min_mm is not null
                then z_max_mm - z_min_mm + coalesce(slice_thickness_mm, 0) end as covered_length_mm
    from series
)
select a.*,
       a.ctdivol_mean_mgy * a.covered_length_mm / 10.0 as dlp_estimate_mgy_cm,
       exists (
           select 1 from measured as b
           where b.study_key = a.study_key and b.device_key = a.device_key
             and b.series_key <> a.series_key and not b.is_localizer
             and abs(b.ctdivol_max_mgy - a.ctdivol_max_mgy) <= 0.01 * a.ctdivol_max_mgy
             and b.z_min_mm <= a.z_min_mm + 5 and b.z_max_mm >= a.z_max_mm - 5
             and ((b.z_max_mm - b.z_min_mm) > (a.z_max_mm - a.z_min_mm) + 0.001
                  or (abs((b.z_max_mm - b.z_min_mm) - (a.z_max_mm - a.z_min_mm)) <= 0.001
                      and b.series_key < a.series_key))
       ) as is_reconstruction
from measured as a
