-- grain (computation behind stg_exam_text, kept as the table derived_exam_text): one row per text a study (unit_kind = study) or a projection event (unit_kind = event)
-- offers to the exam rules, per field. Normalised as pipeline.exams.normalise does.
create or replace view calc_exam_text as
with
projections as materialized (
    -- the deduplicated projection events, computed once for the three uses below
    select study_key, device_key, modality, event_uid, acquisition_protocol, body_part,
           view_position
    from stg_projection_event
),
objects as (
    select study_key, device_key, modality, study_description, series_description, body_part
    from raw_dose_object
),
study_codes as (
    select o.study_key, o.device_key, o.modality, 'procedure_code' as field, s.procedure_code as text_raw
    from (select distinct study_key, device_key, modality from objects) as o
    join raw_study as s using (study_key)
),
protocols as (
    select study_key, device_key, modality, acquisition_protocol from stg_ct_event
    union all
    select study_key, device_key, modality, acquisition_protocol from projections
),
study_texts as (
    select study_key, device_key, modality, field, text_raw from study_codes
    union all
    select study_key, device_key, modality, 'acquisition_protocol', acquisition_protocol from protocols
    union all
    select study_key, device_key, modality, 'study_description', study_description from objects
    union all
    select study_key, device_key, modality, 'series_description', series_description from objects
    union all
    select study_key, device_key, modality, 'body_part', body_part from objects
),
event_texts as (
    select study_key, device_key, modality, event_uid, 'acquisition_protocol' as field,
           acquisition_protocol as text_raw
    from projections
    union all
    select study_key, device_key, modality, event_uid, 'body_part',
           concat_ws(' ', body_part, view_position)
    from projections
),
units as (
    select distinct 'study' as unit_kind, study_key, device_key, null::varchar as event_uid,
           modality, field, text_raw
    from study_texts where text_raw is not null and trim(text_raw) <> ''
    union all
    select distinct 'event', study_key, device_key, event_uid, modality, field, text_raw
    from event_texts where text_raw is not null and trim(text_raw) <> ''
),
normalised as (
    -- texts repeat across studies (protocol names, descriptions): normalise each once
    select text_raw, trim(regexp_replace(lower(text_raw), '[^0-9a-z]+', ' ', 'g')) as text_norm
    from (select distinct text_raw from units)
)
select u.unit_kind, u.study_key, u.device_key, u.event_uid, u.modality, u.field, u.text_raw,
       n.text_norm
from units as u
join normalised as n using (text_raw)
