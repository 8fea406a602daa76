-- grain (computation behind stg_exam_match, kept as the table derived_exam_match): one row per study (unit_kind = study) or projection event (unit_kind = event) that a rule
-- maps to an exam type: the first match by field priority, then rule order
create or replace view calc_exam_match as
with
texts as materialized (
    select * from derived_exam_text
),
text_hits as (
    -- a rule's match depends only on the field, modality and normalised text, and texts repeat
    -- across studies: match each distinct text once, then join the hits back to the units
    select t.field, t.modality, t.text_norm, r.rule_id, r.exam_type, r.field_priority
    from (select distinct field, modality, text_norm from texts) as t
    join raw_exam_rule as r
      on r.field = t.field and r.kind = 'any'
     and (r.modality is null or r.modality = t.modality
          or (r.modality = 'DX' and t.modality = 'CR'))
     and position(' ' || r.phrase || ' ' in ' ' || t.text_norm || ' ') > 0
    where not exists (
        select 1 from raw_exam_rule as n
        where n.rule_id = r.rule_id and n.kind = 'none'
          and position(' ' || n.phrase || ' ' in ' ' || t.text_norm || ' ') > 0)
),
hits as (
    select t.unit_kind, t.study_key, t.device_key, t.event_uid, t.field, t.text_raw,
           h.rule_id, h.exam_type, h.field_priority
    from texts as t
    join text_hits as h
      on h.field = t.field and h.modality is not distinct from t.modality
     and h.text_norm = t.text_norm
)
select unit_kind, study_key, device_key, event_uid, exam_type, field as matched_field,
       text_raw as matched_text, rule_id
from hits
qualify row_number() over (
    partition by unit_kind, study_key, device_key, event_uid
    order by field_priority, rule_id, text_raw) = 1
