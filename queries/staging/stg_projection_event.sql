-- grain: one row per projection irradiation event (event_uid): the copy from the preferred report
-- Preference: a dose report, then a dose screen (Exposure Dose Sequence), then image headers;
-- then the latest report (content date/time, then instance number), so a cumulative report's
-- repeat of an event is not counted twice. Events of a lower source are dropped when the same
-- study has an object of a higher source of the same modality (a dose report makes a dose
-- screen's and the images' events redundant; a dose screen makes the images' redundant).
create or replace view stg_projection_event as
with
best_source as (
    -- per study and modality, the best source any of its objects gives (1 report, 2 screen, 3 images)
    select study_key, modality,
           min(case object_kind when 'image_header' then 3 when 'dose_screen' then 2 else 1 end)
               as best_rank
    from raw_dose_object
    group by study_key, modality
),
events as (
    select e.*, o.content_datetime, o.instance_number, o.object_kind, o.modality
    from raw_projection_event as e
    join raw_dose_object as o using (sop_instance_uid)
),
kept as (
    select e.* from events as e
    left join best_source as b on b.study_key = e.study_key and b.modality = e.modality
    where e.source_kind = 'rdsr' or b.best_rank is null
       or b.best_rank >= (case e.source_kind when 'image_header' then 3
                                            when 'dose_screen' then 2 else 1 end)
)
select * from kept
qualify row_number() over (
    partition by event_uid
    order by (case source_kind when 'image_header' then 3 when 'dose_screen' then 2 else 1 end),
             content_datetime desc nulls last,
             instance_number desc nulls last, sop_instance_uid desc) = 1
