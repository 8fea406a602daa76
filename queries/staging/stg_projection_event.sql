-- grain: one row per projection irradiation event (event_uid): the copy from the preferred report
-- Preference: a dose report, then a dose screen (Exposure Dose Sequence), then image headers;
-- then the latest report (content date/time, then instance number), so a cumulative report's
-- repeat of an event is not counted twice. Events of a lower source are dropped when the same
-- study has an object of a higher source of the same modality (a dose report makes a dose
-- screen's and the images' events redundant; a dose screen makes the images' redundant).
create or replace view stg_projection_event as
with
events as (
    select e.*, o.content_datetime, o.instance_number, o.object_kind, o.modality
    from raw_projection_event as e
    join raw_dose_object as o using (sop_instance_uid)
),
kept as (
    select * from events as e
    where e.source_kind = 'rdsr' or not exists (
        select 1 from raw_dose_object as r
        where r.study_key = e.study_key and r.modality = e.modality
          and (case r.object_kind when 'image_header' then 3 when 'dose_screen' then 2 else 1 end)
            < (case e.source_kind when 'image_header' then 3 when 'dose_screen' then 2 else 1 end))
)
select * from kept
qualify row_number() over (
    partition by event_uid
    order by (case source_kind when 'image_header' then 3 when 'dose_screen' then 2 else 1 end),
             content_datetime desc nulls last,
             instance_number desc nulls last, sop_instance_uid desc) = 1
