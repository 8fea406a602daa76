-- grain: one row per projection irradiation event (event_uid): the copy from the preferred report
-- Preference: a dose report over image headers; then the latest report (content date/time,
-- then instance number), so a cumulative report's repeat of an event is not counted twice.
-- Image-header events are dropped when the same study has a dose report of the same modality.
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
          and r.object_kind <> 'image_header')
)
select * from kept
qualify row_number() over (
    partition by event_uid
    order by (source_kind = 'rdsr') desc, content_datetime desc nulls last,
             instance_number desc nulls last, sop_instance_uid desc) = 1
